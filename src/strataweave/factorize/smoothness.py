"""The graph term lambda * tr(W^T L W) of the joint NMF, with L = D - A kept sparse.

Scaling of `graph_weight`: the penalty used is lambda = graph_weight * n / sum(A), i.e. the
given weight divided by the mean degree. With the loadings normalised every iteration
(see `updates.normalise`), tr(W^T L W) grows like mean degree x ||W||_F^2 while the data
term grows like ||W||_F^2, so one `graph_weight` means the same smoothing on small and
large cohorts, sparse and dense graphs, and whatever the scale of the data.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import scipy.sparse as sp

from strataweave.errors import InputError


def graph_affinity(graph, patients: pd.Index | None):
    """The affinity matrix of `graph`: a sparse/dense matrix, or an object with `affinity` and
    `patients` (a PatientGraph), whose patients must then be those of the views, in order."""
    graph_patients = getattr(graph, "patients", None)
    if graph_patients is not None and patients is not None and not pd.Index(graph_patients).equals(patients):
        raise InputError("graph: its patients differ from the views' patient index; expected the same patients in the same order")
    return getattr(graph, "affinity", graph)


def _checked_affinity(graph, n_patients: int, dtype) -> sp.csr_matrix:
    affinity = sp.csr_matrix(graph, dtype=dtype)
    if affinity.shape != (n_patients, n_patients):
        raise InputError(
            f"graph: found shape {affinity.shape}; expected ({n_patients}, {n_patients}), one row per patient in the views"
        )
    if affinity.nnz and (not np.all(np.isfinite(affinity.data)) or affinity.data.min() < 0):
        raise InputError("graph: found negative or non-finite affinities; expected finite values >= 0")
    asymmetry = abs(affinity - affinity.T)
    if asymmetry.nnz and asymmetry.max() > 1e-6 * max(float(affinity.max()), 1e-300):
        raise InputError("graph: found an asymmetric affinity matrix; expected a symmetric one (e.g. (A + A.T) / 2)")
    affinity = (affinity - sp.diags(affinity.diagonal())).tocsr()
    affinity.eliminate_zeros()
    return affinity


class GraphSmoothness:
    """lambda * tr(W^T L W), split into the non-negative parts the multiplicative update needs.

    The W update is the majorise-minimise step W <- W o (P + lam (D + A) W) / (Q + 2 lam D W):
    because D + A is positive semi-definite, 2D majorises L = D - A, which makes the
    simultaneous update of all entries provably non-increasing (the element-wise argument of
    Cai et al. 2011 covers one entry at a time). It has the same fixed points as their update.
    """

    def __init__(self, graph, graph_weight: float, n_patients: int, dtype=np.float64):
        if graph_weight < 0:
            raise InputError(f"graph_weight: found {graph_weight}; expected a value >= 0")
        self.affinity = _checked_affinity(graph, n_patients, dtype)
        self.degree = np.asarray(self.affinity.sum(axis=1)).ravel().astype(dtype)[:, None]
        total = float(self.degree.sum())
        self.strength = graph_weight * n_patients / total if total > 0 else 0.0
        # built once: lambda (D + A) for the numerator, 2 lambda D for the denominator
        self.symmetric = (self.strength * (self.affinity + sp.diags(self.degree.ravel()))).tocsr().astype(dtype)
        self.push_diagonal = (2.0 * self.strength * self.degree).astype(dtype)

    def per_component(self, W: np.ndarray) -> np.ndarray:
        """w_k^T L w_k for each column k of W (without lambda)."""
        return np.einsum("ik,ik->k", W, self.degree * W - self.affinity @ W)

    def symmetric_product(self, W: np.ndarray) -> np.ndarray:
        """lambda (D + A) W: the graph's share of the W update's numerator (one sparse product)."""
        return self.symmetric @ W

    def ridge(self, W: np.ndarray, symmetric_product: np.ndarray) -> np.ndarray:
        """lambda w_k^T L w_k for each column k, from lambda (D + A) W (as 2 lambda D W - that)."""
        return np.einsum("ik,ik->k", W, self.push_diagonal * W - symmetric_product)
