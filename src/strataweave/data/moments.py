"""Per-feature moments over observed (non-NaN) cells, without warnings for empty features."""

from __future__ import annotations

import numpy as np


def observed_moments(values: np.ndarray, ddof: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per column: number of observed cells, their mean, and their variance with `ddof`.

    Columns with no more than `ddof` observed cells get variance 0.
    """
    observed = ~np.isnan(values)
    count = observed.sum(axis=0)
    mean = np.where(observed, values, 0.0).sum(axis=0) / np.maximum(count, 1)
    squares = (np.where(observed, values - mean, 0.0) ** 2).sum(axis=0)
    variance = np.where(count > ddof, squares / np.maximum(count - ddof, 1), 0.0)
    return count, mean, variance


def feature_median(values: np.ndarray) -> np.ndarray:
    """Median of each column over its observed cells (0 for a column with none).

    One sort for all columns (NaN sorts last), so no per-column Python loop.
    """
    ordered = np.sort(values, axis=0)
    count = (~np.isnan(values)).sum(axis=0)
    low = np.maximum((count - 1) // 2, 0)[None, :]
    high = np.maximum(count // 2 - (count == 0), 0)[None, :]
    middle = (np.take_along_axis(ordered, low, axis=0) + np.take_along_axis(ordered, high, axis=0))[0] / 2.0
    return np.where(count > 0, middle, 0.0)


def feature_minimum(values: np.ndarray) -> np.ndarray:
    """Smallest observed value of each column (0 for a column with none)."""
    minimum = np.where(np.isnan(values), np.inf, values).min(axis=0, initial=np.inf)
    return np.where(np.isinf(minimum), 0.0, minimum)
