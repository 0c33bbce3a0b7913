"""Laplacians, spectral embedding and eigengaps against scipy, numpy and scikit-learn."""

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import laplacian as scipy_laplacian
from sklearn.manifold import spectral_embedding as sklearn_spectral_embedding

from strataweave import InputError
from strataweave.graph import eigengaps, laplacian, spectral_embedding
from strataweave.graph import spectral


def _random_affinity(n, density, seed):
    upper = sp.random(n, n, density=density, random_state=seed, format="csr")
    matrix = sp.triu(upper, k=1)
    return (matrix + matrix.T).tocsr()


def _cliques(sizes, seed=0, bridge=0.0):
    """Disjoint weighted cliques, optionally joined by one weak edge between neighbours."""
    rng = np.random.default_rng(seed)
    blocks = [rng.uniform(0.5, 1.0, (s, s)) for s in sizes]
    dense = sp.block_diag([(b + b.T) / 2 for b in blocks]).toarray()
    np.fill_diagonal(dense, 0)
    starts = np.cumsum([0] + list(sizes))
    for a, b in zip(starts[:-2], starts[1:-1]):
        dense[a, b] = dense[b, a] = bridge
    return sp.csr_matrix(dense)


@pytest.mark.parametrize("normalised", [False, True])
def test_laplacian_equals_scipy_csgraph(normalised):
    affinity = _random_affinity(60, 0.1, 1)
    # scipy.sparse.csgraph.laplacian (normed=True is the symmetric normalised Laplacian)
    expected = scipy_laplacian(affinity.toarray(), normed=normalised)
    np.testing.assert_allclose(laplacian(affinity, normalised=normalised).toarray(), expected, atol=1e-12)


def test_spectral_embedding_matches_scikit_learn_up_to_sign():
    affinity = _cliques([20, 25, 30], seed=2, bridge=0.05)
    ours = spectral_embedding(affinity, n_dims=2)
    # scikit-learn spectral_embedding: normalised Laplacian, first (trivial) vector dropped
    reference = sklearn_spectral_embedding(affinity, n_components=2, drop_first=True, random_state=0)
    for column in range(2):
        correlation = np.corrcoef(ours[:, column], reference[:, column])[0, 1]
        assert abs(correlation) > 0.999


def test_spectral_embedding_sparse_solver_agrees_with_dense(monkeypatch):
    affinity = _cliques([30, 40, 50], seed=3, bridge=0.05)
    dense = spectral_embedding(affinity, n_dims=2)
    monkeypatch.setattr(spectral, "DENSE_LIMIT", 10)
    sparse = spectral_embedding(affinity, n_dims=2)
    np.testing.assert_allclose(np.abs(sparse), np.abs(dense), atol=1e-6)
    np.testing.assert_allclose(sparse, dense, atol=1e-6)  # same sign convention


@pytest.mark.parametrize("dense_limit", [10_000, 10])
def test_eigengaps_equal_numpy_eigenvalues_and_find_the_cluster_count(monkeypatch, dense_limit):
    monkeypatch.setattr(spectral, "DENSE_LIMIT", dense_limit)
    affinity = _cliques([15, 20, 25, 30], seed=4, bridge=0.01)
    table = eigengaps(affinity, max_count=6)
    # numpy.linalg.eigvalsh of the dense normalised Laplacian as the reference
    expected = np.linalg.eigvalsh(scipy_laplacian(affinity.toarray(), normed=True))[:7]
    np.testing.assert_allclose(table["eigenvalue"], expected[:6], atol=1e-8)
    np.testing.assert_allclose(table["gap"], np.diff(expected), atol=1e-8)
    # four nearly separate groups: four small eigenvalues, the largest gap after the fourth
    # (von Luxburg 2007, Statistics and Computing 17:395, Proposition 4 and section 8.3)
    assert table["gap"].idxmax() == 4


def test_isolated_patient_counts_as_its_own_component_and_sits_at_the_origin():
    isolated = sp.csr_matrix((1, 1))
    affinity = sp.block_diag([_cliques([10, 10], bridge=0.0), isolated]).tocsr()
    table = eigengaps(affinity, max_count=4)
    np.testing.assert_allclose(table["eigenvalue"].iloc[:3], 0, atol=1e-10)
    assert table["gap"].idxmax() == 3
    embedding = spectral_embedding(sp.block_diag([_cliques([10, 10], bridge=0.01), isolated]).tocsr(), n_dims=2)
    assert np.isfinite(embedding).all() and (embedding[-1] == 0).all()


def test_bad_counts_are_input_errors():
    affinity = _cliques([5, 5])
    with pytest.raises(InputError, match="max_count: found 10 for a graph of 10 patients"):
        eigengaps(affinity, 10)
    with pytest.raises(InputError, match="n_dims"):
        spectral_embedding(affinity, 0)
