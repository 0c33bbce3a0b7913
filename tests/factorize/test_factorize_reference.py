"""JointNMF against reference libraries: scikit-learn's NMF and scipy's graph Laplacian."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.sparse.csgraph import laplacian as scipy_laplacian
from sklearn.decomposition import NMF
from sklearn.decomposition._nmf import _initialize_nmf

from strataweave.factorize import JointNMF
from strataweave.factorize.init import nndsvd, truncated_svd
from strataweave.factorize.smoothness import GraphSmoothness
from strataweave.factorize.views import prepare_views

from conftest import knn_affinity, planted_views


def _low_rank_matrix(seed=1):
    rng = np.random.default_rng(seed)
    return rng.random((60, 3)) @ rng.random((3, 40)) + 0.05 * rng.random((60, 40))


def _sklearn_mu(X, W0, H0, n_iter):
    model = NMF(3, init="custom", solver="mu", beta_loss="frobenius", max_iter=n_iter, tol=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        W = model.fit_transform(X, W=W0.copy(), H=H0.copy())
    return W, model.components_


def test_single_modality_without_graph_follows_sklearn_mu():
    # Reference: scikit-learn NMF(solver="mu", beta_loss="frobenius") (Lee & Seung 2001 updates)
    # from the same W and H. With one inner update per outer iteration our iterates are the
    # same up to the per-component scaling, so W H and the objective agree to 1e-9 relative.
    X = _low_rank_matrix()
    W0, H0 = _initialize_nmf(X, 3, init="nndsvda", random_state=0)
    model = JointNMF(3, max_iter=30, tol=0, modality_weights=[1.0], inner_updates=1, dtype="float64")  # scikit-learn's precision
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model.fit([X], W_init=W0, H_init=[H0])
    for n_iter in (1, 7, 30):
        W_ref, H_ref = _sklearn_mu(X, W0, H0, n_iter)
        assert model.objective_[n_iter - 1] == pytest.approx(np.sum((X - W_ref @ H_ref) ** 2), rel=1e-9)
    product = model.patient_factor_ @ model.components_[0]
    np.testing.assert_allclose(product, W_ref @ H_ref, rtol=1e-9, atol=1e-12)
    # The factors themselves agree once both are put on unit-norm loadings.
    scale = np.linalg.norm(H_ref, axis=1)
    np.testing.assert_allclose(model.components_[0], H_ref / scale[:, None], rtol=1e-8, atol=1e-12)
    np.testing.assert_allclose(model.patient_factor_, W_ref * scale, rtol=1e-8, atol=1e-12)


@pytest.mark.parametrize("variant", ["nndsvd", "nndsvda"])
def test_nndsvd_matches_sklearn(variant):
    # Reference: scikit-learn's NNDSVD / NNDSVDa initialisation (Boutsidis & Gallopoulos 2008)
    # on the same matrix; both use a randomised SVD, accurate here to ~1e-12 on a rank-3 signal.
    X = _low_rank_matrix()
    blocks = prepare_views([X], weights=[1.0]).blocks
    U, S, Vt = truncated_svd(blocks, X.shape[0], 3, np.random.default_rng(0))
    W, H = nndsvd(U, S, Vt, fill=X.mean() if variant == "nndsvda" else None)
    W_ref, H_ref = _initialize_nmf(X, 3, init=variant, random_state=0)
    np.testing.assert_allclose(W, W_ref, atol=1e-9)
    np.testing.assert_allclose(H, H_ref, atol=1e-9)


def test_truncated_svd_matches_numpy_on_weighted_concatenation():
    # Reference: numpy's full SVD of [sqrt(a1) X1, sqrt(a2) X2] with missing rows as zeros.
    views, _ = planted_views(n_patients=50, features=(30, 20), seed=3)
    views[1][:5] = np.nan
    blocks = prepare_views(views).blocks
    U, S, Vt = truncated_svd(blocks, 50, 3, np.random.default_rng(0))
    joined = np.hstack([np.sqrt(b.weight) * np.nan_to_num(v) for b, v in zip(blocks, views)])
    S_ref = np.linalg.svd(joined, compute_uv=False)[:3]
    np.testing.assert_allclose(S, S_ref, rtol=1e-8)
    np.testing.assert_allclose(np.abs(U.T @ np.linalg.svd(joined)[0][:, :3]), np.eye(3), atol=1e-6)


def test_graph_term_is_trace_with_scipy_laplacian():
    # Reference: scipy.sparse.csgraph.laplacian (L = D - A) and tr(W^T L W) computed densely.
    views, _ = planted_views(n_patients=40, seed=4)
    affinity = knn_affinity(views, 5)
    W = np.random.default_rng(0).random((40, 3))
    smoothness = GraphSmoothness(affinity, graph_weight=0.7, n_patients=40)
    L = scipy_laplacian(affinity.toarray())
    assert smoothness.per_component(W).sum() == pytest.approx(np.trace(W.T @ L @ W), rel=1e-12)
    assert smoothness.strength == pytest.approx(0.7 * 40 / affinity.sum())
