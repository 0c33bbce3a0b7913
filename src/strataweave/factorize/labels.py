"""Subtype labels and a confidence for each patient, from the patient factor W.

Default: k-means on the rows of W scaled to unit length (the profile of each patient over
the components, not its overall size). argmax of W is kept as an option but is a poor
labeller when one component carries the profile common to all patients.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.cluster import KMeans
from sklearn.metrics.pairwise import euclidean_distances

from strataweave.errors import InputError

KMEANS_STARTS = 10
MAX_UNIT_DISTANCE = np.sqrt(2.0)  # largest distance between two non-negative unit vectors
PARTITION_FLOOR = 0.1  # weight of the other components in a factor started from a partition


def partition_factor(labels: np.ndarray, n_components: int) -> np.ndarray:
    """A patient factor that encodes a partition: 1 on the patient's own subtype, PARTITION_FLOOR elsewhere.

    Used as `W_init`, it starts the joint NMF in the basin of that partition (the floor
    keeps every component free to grow, which an exact zero would not under multiplicative updates).
    """
    labels = np.asarray(labels)
    if labels.ndim != 1 or labels.size == 0 or labels.min() < 0 or labels.max() >= n_components:
        raise InputError(f"labels: found codes outside 0..{n_components - 1}; expected one subtype code per patient")
    factor = np.full((labels.size, n_components), PARTITION_FLOOR)
    factor[np.arange(labels.size), labels] = 1.0
    return factor


def _unit_rows(W: np.ndarray, norm_order: int) -> np.ndarray:
    norms = np.linalg.norm(W, ord=norm_order, axis=1, keepdims=True)
    return np.divide(W, norms, out=np.zeros_like(W), where=norms > 0)


def _by_size(labels: np.ndarray, scores: np.ndarray):
    """Renumber subtypes from largest to smallest (ties: lower old number first)."""
    sizes = np.bincount(labels, minlength=scores.shape[1])
    order = np.lexsort((np.arange(len(sizes)), -sizes))
    new_number = np.empty_like(order)
    new_number[order] = np.arange(len(order))
    return new_number[labels], scores[:, order]


def _margin(scores: np.ndarray) -> np.ndarray:
    top_two = -np.sort(-scores, axis=1)[:, :2]
    return top_two[:, 0] - top_two[:, 1]


def scores_for_labels(W: np.ndarray, labels: np.ndarray, n_subtypes: int) -> tuple[np.ndarray, np.ndarray]:
    """(confidence, scores) of patients in given subtypes, as `label_patients` makes them.

    The subtype centres are the means of the unit-length rows of W in each subtype, so a
    partition found elsewhere (a graph, another labeller) gets scores on the patient factor.
    """
    unit = _unit_rows(np.asarray(W, dtype=np.float64), 2)
    membership = np.zeros((unit.shape[0], n_subtypes))
    membership[np.arange(unit.shape[0]), labels] = 1.0
    centres = (membership.T @ unit) / np.maximum(membership.sum(axis=0), 1.0)[:, None]
    scores = np.clip(1.0 - euclidean_distances(unit, centres) / MAX_UNIT_DISTANCE, 0.0, 1.0)
    return _margin(scores), scores


def label_patients(W, n_subtypes: int, method: str = "kmeans", random_state=None):
    """(labels, confidence, scores) for each patient (row of W).

    method "kmeans": k-means with several seeded starts on the unit-length rows of W;
    scores are 1 - distance / sqrt(2) to each subtype centre (1 = at the centre).
    method "argmax": the largest component of each row scaled to sum 1; scores are those shares.
    Confidence is the margin between the best and second-best score, in [0, 1].
    Subtypes are numbered from the largest (0) down. DataFrame input gives pandas output.
    """
    index = W.index if isinstance(W, pd.DataFrame) else None
    values = np.asarray(W, dtype=np.float64)
    if values.ndim != 2 or np.any(values < 0) or not np.all(np.isfinite(values)):
        raise InputError("patient factor: found a non 2-D, negative or non-finite array; expected W from JointNMF")
    if method == "kmeans":
        if not 2 <= n_subtypes <= values.shape[0]:
            raise InputError(f"n_subtypes: found {n_subtypes}; expected 2 to {values.shape[0]} (the patient count)")
        unit = _unit_rows(values, 2)
        model = KMeans(n_clusters=n_subtypes, n_init=KMEANS_STARTS, random_state=random_state).fit(unit)
        scores = 1.0 - model.transform(unit) / MAX_UNIT_DISTANCE
        labels = model.labels_
    elif method == "argmax":
        if n_subtypes != values.shape[1]:
            raise InputError(f"n_subtypes: found {n_subtypes}; expected {values.shape[1]}, the rank of W, for argmax")
        scores = _unit_rows(values, 1)
        labels = scores.argmax(axis=1)
    else:
        raise InputError(f"method: found {method!r}; expected 'kmeans' or 'argmax'")
    labels, scores = _by_size(labels, np.clip(scores, 0.0, 1.0))
    confidence = _margin(scores)
    if index is None:
        return labels, confidence, scores
    return (
        pd.Series(labels, index=index, name="subtype"),
        pd.Series(confidence, index=index, name="confidence"),
        pd.DataFrame(scores, index=index, columns=[f"score_{j}" for j in range(scores.shape[1])]),
    )
