"""Criteria that judge one subtype count from its consensus matrix and resample labels."""

from __future__ import annotations

import numpy as np
from scipy.cluster.hierarchy import cophenet, linkage
from scipy.spatial.distance import squareform
from sklearn.metrics import adjusted_rand_score

from strataweave.errors import InputError
from strataweave.subtypes.consensus import NOT_DRAWN

# A pair never drawn together carries no evidence either way; for the tree it sits halfway.
UNDEFINED_PAIR_DISTANCE = 0.5


def check_window(window: tuple[float, float]) -> tuple[float, float]:
    """The PAC window (lower, upper) with 0 <= lower < upper <= 1, or an InputError."""
    try:
        lower, upper = (float(v) for v in window)
    except (TypeError, ValueError):
        raise InputError(f"pac_window: found {window!r}; expected two numbers (lower, upper)") from None
    if not 0.0 <= lower < upper <= 1.0:
        raise InputError(f"pac_window: found ({lower}, {upper}); expected 0 <= lower < upper <= 1")
    return lower, upper


def _upper_pairs(consensus: np.ndarray) -> np.ndarray:
    """Condensed vector of the patient pairs (upper triangle, as scipy's squareform)."""
    return squareform(consensus, checks=False)


def pac(consensus: np.ndarray, window: tuple[float, float] = (0.1, 0.9)) -> float:
    """Proportion of ambiguous clustering (Senbabaoglu et al. 2014, Scientific Reports).

    CDF(upper) - CDF(lower) of the consensus values over patient pairs, i.e. the share of
    pairs with lower < consensus <= upper. Lower is better: a crisp consensus has values
    near 0 and 1 only. Pairs never drawn together are left out.
    """
    lower, upper = check_window(window)
    values = _upper_pairs(consensus)
    values = values[np.isfinite(values)]
    if values.size == 0:
        return float("nan")
    return float(np.mean((values > lower) & (values <= upper)))


def cophenetic_correlation(consensus: np.ndarray) -> float:
    """Cophenetic correlation of the consensus matrix (Brunet et al. 2004, PNAS).

    Pearson correlation between the distances 1 - consensus and the cophenetic distances of
    their average-linkage tree; 1 for a perfect consensus, lower as it blurs.
    """
    distances = 1.0 - _upper_pairs(consensus).astype(np.float64)
    distances = np.where(np.isfinite(distances), distances, UNDEFINED_PAIR_DISTANCE)
    if distances.size < 2 or np.ptp(distances) == 0.0:
        return float("nan")
    correlation, _ = cophenet(linkage(distances, method="average"), distances)
    return float(correlation)


def smallest_subtype_size(labels: np.ndarray) -> int:
    """Number of patients in the smallest subtype."""
    _, sizes = np.unique(np.asarray(labels), return_counts=True)
    return int(sizes.min())


def resample_stability(resample_labels: np.ndarray, full_labels: np.ndarray) -> float:
    """Mean ARI between each resample's labels and the full-data labels on the drawn patients."""
    resample_labels = np.asarray(resample_labels)
    full_labels = np.asarray(full_labels)
    if resample_labels.shape[1] != full_labels.size:
        raise InputError(
            f"resample labels: found {resample_labels.shape[1]} patients; expected {full_labels.size} "
            "as in the full-data labels"
        )
    scores = [
        adjusted_rand_score(row[row != NOT_DRAWN], full_labels[row != NOT_DRAWN]) for row in resample_labels
    ]
    return float(np.mean(scores))
