"""Cross-network diffusion of Wang et al. 2014 (Nature Methods 11:333), on a sparse support.

Per modality v: P_v(i, j) = W_v(i, j) / (2 sum_{k != i} W_v(i, k)), P_v(i, i) = 1/2, and the
local matrix S_v keeps patient i itself (W_v(i, i) = 1) and its strongest neighbours, rows
summing to 1. Each iteration sets P_v <- S_v (mean of the other modalities' P) S_v^T; the
fused matrix is the mean of the P_v, symmetrised and scaled to a maximum of 1. Every matrix
lives on one fixed set of candidate pairs (plus the diagonal), so no N x N array is formed;
when the candidates are all pairs this is the diffusion exactly as published. Means run over
the modalities that both patients of a pair have.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from strataweave.graph.metrics import block_rows
from strataweave.graph.pairs import row_ranks

# Up to this many patients each product is formed densely (fast, at most ~20 MB per matrix).
DENSE_LIMIT = 1600


def diffuse(left, right, values, presence: np.ndarray, n_neighbours: int, iterations: int) -> np.ndarray:
    """Fused value for each pair (left[p], right[p]) after `iterations` diffusion steps.

    `values` is pairs x modalities (NaN where absent); `presence` is patients x modalities.
    """
    n = presence.shape[0]
    rows = np.concatenate([left, right, np.arange(n)])
    cols = np.concatenate([right, left, np.arange(n)])
    diagonal = rows == cols
    kernel = np.concatenate([values, values, np.ones((n, values.shape[1]))])
    shared = presence[rows] & presence[cols]
    kernel[~shared] = 0.0
    kernel = np.nan_to_num(kernel)
    status = [_transition(rows, diagonal, kernel[:, v], n) for v in range(kernel.shape[1])]
    local = [_local_matrix(rows, cols, diagonal, kernel[:, v], n, n_neighbours) for v in range(kernel.shape[1])]
    weight = shared.astype(np.float64)
    others_count = weight.sum(axis=1, keepdims=True) - weight
    for _ in range(iterations):
        total = sum(status)
        mixed = [
            np.where(others_count[:, v] > 0, (total - status[v]) / np.maximum(others_count[:, v], 1), status[v])
            for v in range(len(status))
        ]
        status = [_masked_product(local[v], mixed[v], rows, cols, n) for v in range(len(status))]
    count = weight.sum(axis=1)
    fused = np.divide(sum(status), count, out=np.zeros(len(rows)), where=count > 0)
    fused[diagonal] = 0.0
    n_pairs = len(left)
    symmetric = 0.5 * (fused[:n_pairs] + fused[n_pairs:2 * n_pairs])
    peak = symmetric.max(initial=0.0)
    return symmetric / peak if peak > 0 else symmetric


def _transition(rows, diagonal, kernel, n) -> np.ndarray:
    """P_v on the support: off-diagonal W / (2 * row sum), diagonal 1/2 where the patient is present."""
    off = np.where(diagonal, 0.0, kernel)
    row_sums = np.bincount(rows, weights=off, minlength=n)
    scaled = np.divide(off, 2.0 * row_sums[rows], out=np.zeros_like(off), where=row_sums[rows] > 0)
    return np.where(diagonal, 0.5 * kernel, scaled)


def _local_matrix(rows, cols, diagonal, kernel, n, n_neighbours) -> sp.csr_matrix:
    """S_v: each present patient itself plus its n_neighbours strongest partners, rows summing to 1."""
    order, rank = row_ranks(rows, cols, np.where(diagonal, np.inf, kernel), n)
    keep = order[(rank <= n_neighbours) & (kernel[order] > 0)]
    weights = kernel[keep]
    row_sums = np.bincount(rows[keep], weights=weights, minlength=n)
    return sp.csr_matrix((weights / row_sums[rows[keep]], (rows[keep], cols[keep])), shape=(n, n))


def _masked_product(local: sp.csr_matrix, mixed: np.ndarray, rows, cols, n) -> np.ndarray:
    """(S X S^T) read at the support entries: densely for small cohorts, else in blocks of rows."""
    if n <= DENSE_LIMIT:
        middle = np.zeros((n, n))
        middle[rows, cols] = mixed
        left_product = local @ middle
        return (local @ left_product.T).T[rows, cols]
    middle = sp.csr_matrix((mixed, (rows, cols)), shape=(n, n))
    local_t = local.T.tocsr()
    out = np.empty(len(rows))
    order = np.argsort(rows, kind="stable")
    sorted_rows = rows[order]
    step = block_rows(n, n)
    for start in range(0, n, step):
        stop = min(start + step, n)
        block = (local[start:stop] @ middle @ local_t).tocsr()
        block.sort_indices()
        lo, hi = np.searchsorted(sorted_rows, [start, stop])
        entries = order[lo:hi]
        out[entries] = np.asarray(block[rows[entries] - start, cols[entries]]).ravel()
    return out
