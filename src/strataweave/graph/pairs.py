"""Patient pairs as two index arrays (left < right) and the sparse matrices built from them."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp


def neighbour_pairs(patient_ids: np.ndarray, neighbour_indices: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Directed (patient, neighbour) pairs in global positions from an n x k neighbour list."""
    rows = np.repeat(patient_ids, neighbour_indices.shape[1])
    return rows, patient_ids[neighbour_indices.ravel()]


def unique_pairs(rows: np.ndarray, cols: np.ndarray, n_patients: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Undirected pairs (left < right) without repeats, sorted, and the input position of each.

    Self pairs are dropped. The sort key is left * n_patients + right (see `pair_codes`).
    """
    left, right = np.minimum(rows, cols), np.maximum(rows, cols)
    kept = np.flatnonzero(left != right)
    codes, first = np.unique(pair_codes(left[kept], right[kept], n_patients), return_index=True)
    return codes // n_patients, codes % n_patients, kept[first]


def pair_codes(left: np.ndarray, right: np.ndarray, n_patients: int) -> np.ndarray:
    """One sortable integer per pair (left < right)."""
    return left.astype(np.int64) * n_patients + right


def symmetric_matrix(left, right, values, n_patients: int) -> sp.csr_matrix:
    """Symmetric CSR with values at (left, right) and (right, left), zero diagonal, zeros dropped."""
    matrix = sp.coo_matrix(
        (np.concatenate([values, values]), (np.concatenate([left, right]), np.concatenate([right, left]))),
        shape=(n_patients, n_patients),
    ).tocsr()
    matrix.eliminate_zeros()
    matrix.sort_indices()
    return matrix


def row_ranks(rows: np.ndarray, cols: np.ndarray, values: np.ndarray, n_rows: int) -> tuple[np.ndarray, np.ndarray]:
    """(order, rank): entries sorted by row then value descending, and each one's rank in its row.

    Ties are broken by column, so the ranking does not depend on the order of the entries.
    """
    order = np.lexsort((cols, -values, rows))
    sorted_rows = rows[order]
    row_start = np.searchsorted(sorted_rows, np.arange(n_rows))
    return order, np.arange(len(order)) - row_start[sorted_rows]


def strongest_pairs(left, right, values, n_patients: int, n_neighbours: int, only: np.ndarray | None = None) -> np.ndarray:
    """Mask of pairs among a patient's n_neighbours strongest positive values (at either end).

    With `only` (a boolean mask over patients) just those patients choose their partners.
    """
    rows = np.concatenate([left, right])
    both = np.concatenate([values, values])
    order, rank = row_ranks(rows, np.concatenate([right, left]), both, n_patients)
    chosen = order[(rank < n_neighbours) & (both[order] > 0)]
    if only is not None:
        chosen = chosen[only[rows[chosen]]]
    pair_of_entry = np.tile(np.arange(len(left)), 2)
    keep = np.zeros(len(left), dtype=bool)
    keep[pair_of_entry[chosen]] = True
    return keep
