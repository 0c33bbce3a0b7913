"""Scoring patients against the fitted subtypes, the same way for training and new patients.

The labeller clusters the unit-length rows of the patient factor W with k-means, so a
subtype is the centre of its members' unit-length rows; a patient's score for a subtype is
1 - distance / sqrt(2) (1 at the centre, 0 at the farthest point two non-negative unit
vectors can be apart), as the labeller scores them. A patient is flagged as far from
every subtype when its distance to the nearest subtype (1 - best score) exceeds the 99th
percentile of that distance in the training cohort.
"""

from __future__ import annotations

import numpy as np

MAX_UNIT_DISTANCE = np.sqrt(2.0)
FAR_PERCENTILE = 99.0


def project_patients(model, views: list) -> np.ndarray:
    """Patient factor rows with the loadings held fixed; missing cells and modalities masked out."""
    arrays = [np.asarray(view, dtype=np.float64) for view in views]
    masks = [np.isfinite(values) for values in arrays]
    return model.transform([np.where(mask, values, 0.0) for values, mask in zip(arrays, masks)], mask=masks)


def unit_rows(W: np.ndarray) -> np.ndarray:
    norms = np.linalg.norm(W, axis=1, keepdims=True)
    return np.divide(W, norms, out=np.zeros_like(W, dtype=np.float64), where=norms > 0)


def subtype_centres(W: np.ndarray, labels: np.ndarray, count: int) -> np.ndarray:
    """count x rank mean of the unit-length rows of each subtype's members."""
    unit = unit_rows(np.asarray(W, dtype=np.float64))
    members = np.zeros((count, unit.shape[0]))
    members[labels, np.arange(unit.shape[0])] = 1.0
    return (members @ unit) / np.maximum(members.sum(axis=1, keepdims=True), 1.0)


def centre_distances(W: np.ndarray, centres: np.ndarray) -> np.ndarray:
    """patients x subtypes Euclidean distance of each unit-length row to each centre."""
    unit = unit_rows(np.asarray(W, dtype=np.float64))
    squared = (unit**2).sum(axis=1)[:, None] - 2.0 * unit @ centres.T + (centres**2).sum(axis=1)[None, :]
    return np.sqrt(np.clip(squared, 0.0, None))


def subtype_scores(W: np.ndarray, centres: np.ndarray) -> np.ndarray:
    """patients x subtypes scores in [0, 1]: nearness to each subtype centre."""
    return np.clip(1.0 - centre_distances(W, centres) / MAX_UNIT_DISTANCE, 0.0, 1.0)


def far_threshold(W: np.ndarray, centres: np.ndarray) -> float:
    """The training cohort's 99th percentile of the distance to the nearest subtype."""
    scores = subtype_scores(W, centres)
    return float(np.percentile(1.0 - scores.max(axis=1), FAR_PERCENTILE))


def placement(W: np.ndarray, labels: np.ndarray, count: int) -> tuple[np.ndarray, float]:
    """Subtype centres and far threshold from the training patients' projected factor and labels."""
    centres = subtype_centres(W, labels, count)
    return centres, far_threshold(W, centres)


def margin(scores: np.ndarray) -> np.ndarray:
    """Best minus second-best score of each patient."""
    top_two = -np.sort(-scores, axis=1)[:, :2]
    return top_two[:, 0] - top_two[:, 1]
