"""Patient-to-patient distances (Euclidean, 1 - Pearson, cosine) computed in blocks.

Each metric becomes a row transform plus one matrix product, so a block of distances costs
one BLAS call and no N x N array is ever formed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

METRICS = ("euclidean", "correlation", "cosine")

# Elements of one block of distances (32 MB in float64): bounds the working memory.
BLOCK_ELEMENTS = 2**22


@dataclass(frozen=True)
class RowSpace:
    """Rows prepared for one metric: `rows` (transformed), squared norms for Euclidean."""

    metric: str
    rows: np.ndarray
    squared_norms: np.ndarray | None

    @property
    def n_rows(self) -> int:
        return self.rows.shape[0]


def prepare_rows(matrix: np.ndarray, metric: str) -> RowSpace:
    """Transform rows so that a dot product gives the metric (centred and/or unit length)."""
    matrix = np.asarray(matrix, dtype=np.float64)
    if metric == "euclidean":
        return RowSpace(metric, matrix, np.einsum("ij,ij->i", matrix, matrix))
    if metric == "correlation":
        matrix = matrix - matrix.mean(axis=1, keepdims=True)
    norms = np.linalg.norm(matrix, axis=1, keepdims=True)
    return RowSpace(metric, matrix / norms, None)


def _scores(space: RowSpace, products: np.ndarray, right_norms) -> np.ndarray:
    """Turn dot products into scores ordered like distances within a row (in place).

    Euclidean: ||y||^2 - 2 x.y (the row's own ||x||^2 is added later); otherwise -x.y.
    """
    if space.metric != "euclidean":
        return np.negative(products, out=products)
    products *= -2.0
    products += right_norms
    return products


def distances_from_scores(space: RowSpace, scores: np.ndarray, left_norms) -> np.ndarray:
    """Distances from scores; `left_norms` are the squared norms of the rows, shaped to broadcast."""
    if space.metric != "euclidean":
        return np.maximum(scores + 1.0, 0.0)
    return np.sqrt(np.maximum(scores + left_norms, 0.0))


def block_scores(space: RowSpace, start: int, stop: int) -> np.ndarray:
    """Scores from rows start..stop-1 to every row (a (stop - start) x n block), ordered like distances."""
    return row_scores(space, slice(start, stop))


def row_scores(space: RowSpace, rows) -> np.ndarray:
    """Scores from `rows` (a slice or positions) to every row, ordered like distances."""
    norms = space.squared_norms[None, :] if space.squared_norms is not None else None
    return _scores(space, space.rows[rows] @ space.rows.T, norms)


def left_norms(space: RowSpace, rows) -> np.ndarray | None:
    """Squared norms of `rows` as a column, for distances_from_scores on a block."""
    return None if space.squared_norms is None else space.squared_norms[rows][:, None]


def block_rows(n_rows: int, n_columns: int) -> int:
    """Rows per block so that a block of n_columns distances stays within BLOCK_ELEMENTS."""
    return int(max(1, min(n_rows, BLOCK_ELEMENTS // max(n_columns, 1))))


def paired_distances(space: RowSpace, left: np.ndarray, right: np.ndarray) -> np.ndarray:
    """Distance between rows left[p] and right[p] for every pair p, in chunks of pairs."""
    out = np.empty(len(left), dtype=np.float64)
    step = block_rows(len(left), 2 * space.rows.shape[1])
    norms = space.squared_norms
    for start in range(0, len(left), step):
        a, b = left[start:start + step], right[start:start + step]
        scores = _scores(space, np.einsum("ij,ij->i", space.rows[a], space.rows[b]), None if norms is None else norms[b])
        out[start:start + step] = distances_from_scores(space, scores, None if norms is None else norms[a])
    return out
