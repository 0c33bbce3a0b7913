"""Criteria that judge one subtype count from its consensus matrix and resample labels (PAC is
gathered with the consensus itself, in `consensus.summarise_consensus`)."""

from __future__ import annotations

import numpy as np
from scipy.cluster.hierarchy import cophenet, linkage
from scipy.spatial.distance import squareform
from sklearn.metrics import adjusted_rand_score

from strataweave.errors import InputError
from strataweave.subtypes.consensus import NOT_DRAWN

# A pair never drawn together carries no evidence either way; for the tree it sits halfway.
UNDEFINED_PAIR_DISTANCE = 0.5


def cophenetic_correlation(consensus: np.ndarray) -> float:
    """Cophenetic correlation of the consensus matrix (Brunet et al. 2004, PNAS).

    Pearson correlation between the distances 1 - consensus and the cophenetic distances of
    their average-linkage tree; 1 for a perfect consensus, lower as it blurs.
    """
    distances = 1.0 - squareform(consensus, checks=False).astype(np.float64)  # each pair once
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
