"""Small invented multi-modal cohorts for the factorize tests."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.neighbors import kneighbors_graph


def planted_views(n_patients=120, features=(40, 30, 20), n_groups=3, noise=0.3, seed=0):
    """Non-negative views with `n_groups` planted patient groups; returns (views, groups)."""
    rng = np.random.default_rng(seed)
    groups = rng.integers(0, n_groups, n_patients)
    membership = np.eye(n_groups)[groups] + 0.1 * rng.random((n_patients, n_groups))
    views = [membership @ rng.gamma(1.0, 1.0, (n_groups, m)) + noise * rng.gamma(1.0, 1.0, (n_patients, m))
             for m in features]
    return views, groups


def knn_affinity(views, n_neighbours=8) -> sp.csr_matrix:
    """Symmetrised k-nearest-neighbour graph (scikit-learn) on the concatenated, NaN-zeroed views."""
    joined = np.hstack([np.nan_to_num(v / np.nanmax(v)) for v in views])
    graph = kneighbors_graph(joined, n_neighbours, include_self=False)
    return ((graph + graph.T) / 2).tocsr()


@pytest.fixture
def cohort():
    views, groups = planted_views()
    return views, groups, knn_affinity(views)
