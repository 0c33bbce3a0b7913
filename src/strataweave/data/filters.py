"""Feature filters: each returns a boolean mask over the columns (features) of a patients x features array."""

from __future__ import annotations

import numpy as np

from strataweave.data.moments import feature_median, observed_moments

RANKINGS = ("variance", "mad")


def feature_variance(values: np.ndarray) -> np.ndarray:
    """Sample variance (ddof=1) of each feature over its observed cells; 0 where fewer than two."""
    return observed_moments(values, ddof=1)[2]


def within_missing_limit(values: np.ndarray, max_missing_fraction: float) -> np.ndarray:
    """Features whose fraction of missing patients is at most `max_missing_fraction`."""
    return np.isnan(values).mean(axis=0) <= max_missing_fraction


def above_min_variance(values: np.ndarray, min_variance: float) -> np.ndarray:
    """Features whose variance is at least `min_variance` and not zero (near-zero variance filter)."""
    variance = feature_variance(values)
    return (variance >= min_variance) & (variance > 0)


def top_ranked(values: np.ndarray, n_features: int, rank_by: str) -> np.ndarray:
    """The `n_features` most variable features by variance or median absolute deviation.

    Ties keep the earlier feature; the mask keeps the original column order.
    """
    if rank_by == "variance":
        spread = feature_variance(values)
    else:
        spread = feature_mad(values)
    order = np.argsort(-spread, kind="stable")[:n_features]
    keep = np.zeros(values.shape[1], dtype=bool)
    keep[order] = True
    return keep


def feature_mad(values: np.ndarray) -> np.ndarray:
    """Median absolute deviation from the median (unscaled) of each feature over its observed cells."""
    return feature_median(np.abs(values - feature_median(values)[None, :]))
