"""Cross-network diffusion against a dense transcription of the published equations."""

import numpy as np
import pandas as pd
from scipy.spatial.distance import cdist

from strataweave.graph import fuse_modalities


def _dense_reference(kernels, n_neighbours, iterations):
    """Wang et al. 2014 (Nature Methods 11:333), eqs. 2-4, with dense matrices.

    P(i,j) = W(i,j) / (2 sum_{k != i} W(i,k)), P(i,i) = 1/2; S keeps i and its strongest
    n_neighbours; P_v <- S_v (mean of the other P) S_v^T; result: mean of the P_v.
    """
    status, local = [], []
    for w in kernels:
        off = w - np.diag(np.diag(w))
        status.append(off / (2 * off.sum(axis=1, keepdims=True)) + 0.5 * np.eye(len(w)))
        s = np.zeros_like(w)
        for i in range(len(w)):
            order = np.argsort(-np.where(np.arange(len(w)) == i, np.inf, w[i]), kind="stable")
            keep = order[: n_neighbours + 1]
            s[i, keep] = w[i, keep] / w[i, keep].sum()
        local.append(s)
    for _ in range(iterations):
        status = [local[v] @ (sum(status) - status[v]) / (len(status) - 1) @ local[v].T for v in range(len(status))]
    fused = sum(status) / len(status)
    fused = 0.5 * (fused + fused.T)
    np.fill_diagonal(fused, 0)
    return fused / fused.max()


def _kernel(matrix, k, spread=0.5):
    d = cdist(matrix, matrix)
    s = np.sort(d, axis=1)[:, 1:k + 1].mean(axis=1)
    eps = (s[:, None] + s[None, :] + d) / 3
    return np.exp(-(d**2) / (2 * (spread * eps) ** 2))


def test_diffusion_on_all_pairs_equals_dense_published_equations():
    rng = np.random.default_rng(11)
    n = 25
    ids = [f"p{i}" for i in range(n)]
    matrices = [rng.normal(size=(n, 4)), rng.normal(size=(n, 6)), rng.normal(size=(n, 3))]
    data = {f"m{v}": pd.DataFrame(x, index=ids) for v, x in enumerate(matrices)}
    graph = fuse_modalities(data, rule="diffusion", n_neighbours=n - 1, diffusion_neighbours=5,
                            diffusion_iterations=4)
    expected = _dense_reference([_kernel(x, n - 1) for x in matrices], 5, 4)
    np.testing.assert_allclose(graph.affinity.toarray(), expected, rtol=1e-9, atol=1e-12)


def test_diffusion_of_two_identical_graphs_keeps_their_neighbour_structure():
    rng = np.random.default_rng(12)
    centres = rng.normal(scale=4, size=(3, 5))
    matrix = np.repeat(centres, 15, axis=0) + rng.normal(size=(45, 5))
    frame = pd.DataFrame(matrix, index=[f"p{i}" for i in range(45)])
    k = 6
    graph = fuse_modalities({"a": frame, "b": frame.copy()}, rule="diffusion", n_neighbours=k, diffusion_neighbours=k)
    single = graph.modality_graphs["a"].toarray()
    fused = graph.affinity.toarray()
    own = np.argsort(-single, axis=1)[:, :k]
    top = np.argsort(-fused, axis=1)[:, :k]
    overlap = np.mean([len(set(a) & set(b)) / k for a, b in zip(own, top)])
    assert overlap > 0.8
    labels = np.repeat(np.arange(3), 15)
    assert (labels[top] == labels[:, None]).mean() > 0.95


def test_sparse_blocks_give_the_same_diffusion_as_dense_products(monkeypatch):
    from strataweave.graph import diffusion, metrics

    rng = np.random.default_rng(13)
    ids = [f"p{i}" for i in range(60)]
    data = {"a": pd.DataFrame(rng.normal(size=(60, 4)), index=ids),
            "b": pd.DataFrame(rng.normal(size=(50, 3)), index=ids[10:])}
    options = {"rule": "diffusion", "n_neighbours": 6, "diffusion_iterations": 3}
    dense = fuse_modalities(data, **options).affinity
    monkeypatch.setattr(diffusion, "DENSE_LIMIT", 10)
    monkeypatch.setattr(metrics, "BLOCK_ELEMENTS", 13 * 60)  # several row blocks
    sparse = fuse_modalities(data, **options).affinity
    np.testing.assert_allclose(sparse.toarray(), dense.toarray(), rtol=1e-12, atol=1e-15)
