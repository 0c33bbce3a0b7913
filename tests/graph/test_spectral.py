"""Spectral embedding and eigengaps against scipy, numpy and the properties of the eigenmap."""

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import laplacian as scipy_laplacian

from strataweave import InputError
from strataweave.graph import eigengaps, spectral_embedding
from strataweave.graph import spectral


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


def test_spectral_embedding_keeps_weakly_joined_groups_apart_and_repeats_itself():
    sizes = [20, 25, 30]
    affinity = _cliques(sizes, seed=2, bridge=0.05)
    embedding = spectral_embedding(affinity, n_dims=2)
    groups = np.repeat(np.arange(3), sizes)
    centres = np.stack([embedding[groups == g].mean(axis=0) for g in range(3)])
    spread = max(np.linalg.norm(embedding[groups == g] - centres[g], axis=1).max() for g in range(3))
    # near-separate groups sit at distinct points of the eigenmap (von Luxburg 2007, section 7)
    assert spread < 0.1 * min(np.linalg.norm(centres[i] - centres[j]) for i in range(3) for j in range(i))
    np.testing.assert_array_equal(spectral_embedding(affinity, n_dims=2), embedding)


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



def test_large_graphs_switch_to_lobpcg_and_keep_the_partitions_and_eigenmap_of_arpack(monkeypatch):
    from sklearn.datasets import make_blobs
    from sklearn.metrics import adjusted_rand_score
    from sklearn.neighbors import kneighbors_graph

    from strataweave.subtypes.baselines import graph_partitions

    points, _ = make_blobs(900, n_features=10, centers=5, cluster_std=4.0, random_state=3)  # one connected graph
    knn = kneighbors_graph(points, 15, include_self=False)
    affinity = sp.csr_matrix(0.5 * (knn + knn.T))
    counts = [2, 3, 4, 5, 6]
    assert spectral.eigen_solver(affinity.shape[0]) == "arpack"
    arpack_partitions, arpack_map = graph_partitions(affinity, counts, 1), spectral_embedding(affinity, n_dims=4)
    monkeypatch.setattr(spectral, "LOBPCG_ABOVE", 500)
    assert spectral.eigen_solver(affinity.shape[0]) == "lobpcg"
    lobpcg_partitions, lobpcg_map = graph_partitions(affinity, counts, 1), spectral_embedding(affinity, n_dims=4)
    # scikit-learn's ARPACK eigenmap as the reference: the same partitions and the same subspace
    for count in counts:
        assert adjusted_rand_score(arpack_partitions[count], lobpcg_partitions[count]) > 0.95, count
    cosines = np.linalg.svd(np.linalg.qr(arpack_map)[0].T @ np.linalg.qr(lobpcg_map)[0], compute_uv=False)
    assert cosines.min() > 0.99
