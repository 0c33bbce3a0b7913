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


def per_feature(values: np.ndarray, statistic) -> np.ndarray:
    """`statistic(columns, axis=0)` over the features with at least one observed cell; 0 for the others.

    Keeps nan-aware reducers (nanmedian, nanmin, ...) from warning about empty features.
    """
    observed = ~np.isnan(values).all(axis=0)
    out = np.zeros(values.shape[1])
    out[observed] = statistic(values[:, observed], axis=0)
    return out
