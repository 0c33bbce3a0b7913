"""Kernel values against the published formula (Wang et al. 2014) and scikit-learn's RBF kernel."""

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import cdist
from sklearn.metrics.pairwise import rbf_kernel

from strataweave.graph import fuse_modalities
from strataweave.graph.kernels import gaussian, scaled_exponential


def _frame(matrix, prefix="p"):
    return pd.DataFrame(matrix, index=[f"{prefix}{i}" for i in range(len(matrix))])


def test_scaled_exponential_graph_equals_formula_computed_directly():
    rng = np.random.default_rng(7)
    matrix = rng.normal(size=(30, 4))
    k, spread = 5, 0.5
    graph = fuse_modalities({"only": _frame(matrix)}, rule="average", n_neighbours=k)
    # direct computation, pair by pair, of eps_ij = (s_i + s_j + d_ij) / 3 with s_i the mean
    # distance to the k nearest neighbours (Wang et al. 2014, Nature Methods 11:333, eq. 1)
    d = cdist(matrix, matrix)
    s = np.sort(d, axis=1)[:, 1:k + 1].mean(axis=1)
    expected = np.zeros_like(d)
    for i in range(30):
        for j in range(30):
            eps = (s[i] + s[j] + d[i, j]) / 3
            expected[i, j] = np.exp(-d[i, j] ** 2 / (2 * (spread * eps) ** 2))
    modality = graph.modality_graphs["only"].toarray()
    on_edges = modality > 0
    np.testing.assert_allclose(modality[on_edges], expected[on_edges], rtol=1e-10)
    # every patient's k nearest neighbours are edges of its modality graph
    nearest = np.argsort(d, axis=1)[:, 1:k + 1]
    assert on_edges[np.arange(30)[:, None], nearest].all()


def test_scaled_exponential_is_one_at_zero_distance_and_in_unit_interval():
    d = np.array([0.0, 0.5, 3.0])
    values = scaled_exponential(d, np.array([0.0, 1.0, 1.0]), np.array([0.0, 1.0, 1.0]))
    assert values[0] == 1.0 and ((values > 0) & (values <= 1)).all()


def test_scaled_exponential_graph_does_not_depend_on_units():
    matrix = np.random.default_rng(8).normal(size=(40, 6))
    base = fuse_modalities({"m": _frame(matrix)}, n_neighbours=6).affinity
    scaled = fuse_modalities({"m": _frame(matrix * 1000.0)}, n_neighbours=6).affinity
    np.testing.assert_allclose(base.toarray(), scaled.toarray(), rtol=1e-8, atol=1e-12)


def test_gaussian_kernel_equals_scikit_learn_rbf():
    matrix = np.random.default_rng(9).normal(size=(25, 3))
    h = 1.7
    # scikit-learn rbf_kernel: exp(-gamma ||x - y||^2), gamma = 1 / (2 h^2)
    np.testing.assert_allclose(gaussian(cdist(matrix, matrix), h), rbf_kernel(matrix, gamma=1 / (2 * h**2)), rtol=1e-12)


def test_gaussian_graph_uses_median_neighbour_distance_by_default():
    matrix = np.random.default_rng(10).normal(size=(30, 3))
    graph = fuse_modalities({"m": _frame(matrix)}, rule="average", n_neighbours=4, kernel="gaussian")
    d = cdist(matrix, matrix)
    h = float(np.median(np.sort(d, axis=1)[:, 1:5]))
    assert graph.parameters["bandwidth"]["m"] == pytest.approx(h, rel=1e-12)
    modality = graph.modality_graphs["m"].toarray()
    reference = rbf_kernel(matrix, gamma=1 / (2 * h**2))  # scikit-learn RBF kernel
    np.testing.assert_allclose(modality[modality > 0], reference[modality > 0], rtol=1e-10)
