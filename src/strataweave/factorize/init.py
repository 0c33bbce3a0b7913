"""Starting factors for the joint NMF: NNDSVD / NNDSVDa or random, on the concatenated data.

The concatenation is [sqrt(alpha_1) X_1, ..., sqrt(alpha_V) X_V] with missing rows and
entries as zeros. It is never built: the truncated SVD is a randomised range finder
(Halko, Martinsson & Tropp 2011) that only multiplies block by block.
"""

from __future__ import annotations

import numpy as np

from strataweave.factorize.views import ViewBlock

ZERO_CUTOFF = 1e-6  # NNDSVD entries below this are set to zero (as in Boutsidis & Gallopoulos 2008)


def _concat_times(blocks: list[ViewBlock], right: list[np.ndarray], n_patients: int) -> np.ndarray:
    """Z @ R for the concatenation Z, with R given per block."""
    out = np.zeros((n_patients, right[0].shape[1]), dtype=blocks[0].data.dtype)
    for block, part in zip(blocks, right):
        block.scatter_add(out, np.sqrt(block.weight) * (block.data @ part))
    return out


def _concat_t_times(blocks: list[ViewBlock], left: np.ndarray) -> list[np.ndarray]:
    """Z^T @ Y, returned per block."""
    return [np.sqrt(b.weight) * (b.data.T @ b.restrict(left)) for b in blocks]


def truncated_svd(blocks: list[ViewBlock], n_patients: int, rank: int, rng: np.random.Generator,
                  n_oversamples: int = 10, n_power_iter: int = 4):
    """Top `rank` singular triplets (U, S, Vt) of the concatenated, weighted data."""
    width = min(rank + n_oversamples, n_patients, sum(b.data.shape[1] for b in blocks))
    sketch = [rng.standard_normal((b.data.shape[1], width)).astype(b.data.dtype) for b in blocks]
    Q = np.linalg.qr(_concat_times(blocks, sketch, n_patients))[0]
    for _ in range(n_power_iter):
        back = np.linalg.qr(np.vstack(_concat_t_times(blocks, Q)))[0]
        splits = np.cumsum([b.data.shape[1] for b in blocks])[:-1]
        Q = np.linalg.qr(_concat_times(blocks, np.split(back, splits), n_patients))[0]
    small = np.vstack(_concat_t_times(blocks, Q)).T
    U_small, S, Vt = np.linalg.svd(small, full_matrices=False)
    return (Q @ U_small)[:, :rank], S[:rank], Vt[:rank]


def nndsvd(U: np.ndarray, S: np.ndarray, Vt: np.ndarray, fill: float | None = None):
    """NNDSVD of Boutsidis & Gallopoulos (2008) from a truncated SVD; `fill` gives NNDSVDa.

    Each singular pair after the first is replaced by the larger (by norm product) of its
    positive and negative parts. With `fill`, zeros are replaced by it (NNDSVDa: the data mean),
    which multiplicative updates need, since they cannot move an exact zero.
    """
    pos_u, neg_u = np.maximum(U, 0), np.maximum(-U, 0)
    pos_v, neg_v = np.maximum(Vt, 0), np.maximum(-Vt, 0)
    norms = [np.linalg.norm(part, axis=axis) for part, axis in ((pos_u, 0), (neg_u, 0), (pos_v, 1), (neg_v, 1))]
    pos_mass, neg_mass = norms[0] * norms[2], norms[1] * norms[3]
    use_pos = pos_mass > neg_mass
    u = np.where(use_pos, pos_u, neg_u)
    v = np.where(use_pos[:, None], pos_v, neg_v)
    u_norm, v_norm = np.where(use_pos, norms[0], norms[1]), np.where(use_pos, norms[2], norms[3])
    scale = np.sqrt(S * np.where(use_pos, pos_mass, neg_mass))
    with np.errstate(invalid="ignore", divide="ignore"):
        W = np.nan_to_num(u * (scale / u_norm))
        H = np.nan_to_num(v * (scale / v_norm)[:, None])
    W[:, 0] = np.sqrt(S[0]) * np.abs(U[:, 0])
    H[0] = np.sqrt(S[0]) * np.abs(Vt[0])
    W[W < ZERO_CUTOFF] = 0
    H[H < ZERO_CUTOFF] = 0
    if fill is not None:
        W[W == 0] = fill
        H[H == 0] = fill
    return W, H


def _observed_mean(blocks: list[ViewBlock]) -> float:
    total = sum(np.sqrt(b.weight) * float(b.data.sum()) for b in blocks)
    count = sum(b.data.size if b.entry_mask is None else float(b.entry_mask.sum()) for b in blocks)
    return total / count


def _split_loadings(blocks: list[ViewBlock], H: np.ndarray) -> list[np.ndarray]:
    """Undo the sqrt(alpha) weighting of the concatenation, one loading matrix per block."""
    splits = np.cumsum([b.data.shape[1] for b in blocks])[:-1]
    return [np.ascontiguousarray(part / np.sqrt(b.weight)) for b, part in zip(blocks, np.split(H, splits, axis=1))]


def initial_factors(blocks: list[ViewBlock], n_patients: int, rank: int, method: str, rng: np.random.Generator):
    """(W, [H_v]) by "nndsvd", "nndsvda" or "random" on the weighted concatenation."""
    dtype = blocks[0].data.dtype
    if method == "random":
        scale = np.sqrt(_observed_mean(blocks) / rank)
        W = scale * np.abs(rng.standard_normal((n_patients, rank)))
        H = scale * np.abs(rng.standard_normal((rank, sum(b.data.shape[1] for b in blocks))))
    else:
        U, S, Vt = truncated_svd(blocks, n_patients, rank, rng)
        W, H = nndsvd(U, S, Vt, fill=_observed_mean(blocks) if method == "nndsvda" else None)
    return W.astype(dtype), [h.astype(dtype) for h in _split_loadings(blocks, H)]
