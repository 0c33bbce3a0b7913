"""Per-feature scaling and the non-negativity that NMF needs."""

from __future__ import annotations

import numpy as np

from strataweave.data.moments import observed_moments

SCALINGS = ("zscore", "none")
NON_NEGATIVITY = ("shift", "split", "none")
POSITIVE_SUFFIX = ":pos"
NEGATIVE_SUFFIX = ":neg"


def feature_mean_std(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean and population standard deviation (ddof=0, as scipy.stats.zscore) over observed cells.

    A feature without spread gets a standard deviation of 1 so that it maps to 0, not NaN.
    """
    _, mean, variance = observed_moments(values, ddof=0)
    std = np.sqrt(variance)
    return mean, np.where(std > 0, std, 1.0)


def zscore(values: np.ndarray, mean: np.ndarray, std: np.ndarray) -> np.ndarray:
    """(value - fitted mean) / fitted standard deviation, per feature."""
    return (values - mean[None, :]) / std[None, :]


def shift_non_negative(values: np.ndarray, minimum: np.ndarray) -> np.ndarray:
    """Subtract the fitted feature minimum; new patients below it are clipped to 0."""
    return np.maximum(values - minimum[None, :], 0.0)


def split_signs(values: np.ndarray) -> np.ndarray:
    """Each feature becomes two non-negative columns: its positive part, then its negative part."""
    return np.concatenate([np.maximum(values, 0.0), np.maximum(-values, 0.0)], axis=1)


def split_names(features) -> list[str]:
    """Column names matching :func:`split_signs`."""
    return [f"{f}{POSITIVE_SUFFIX}" for f in features] + [f"{f}{NEGATIVE_SUFFIX}" for f in features]
