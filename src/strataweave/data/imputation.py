"""Filling missing cells within one modality: k nearest patients, or the feature median."""

from __future__ import annotations

import numpy as np
from sklearn.impute import KNNImputer

IMPUTERS = ("knn", "median", "none")


def knn_fill(values: np.ndarray, reference: np.ndarray, neighbours: int) -> np.ndarray:
    """Fill missing cells from the `neighbours` nearest reference patients (scikit-learn's KNNImputer).

    `reference` is the training matrix; it is stored in the transform log so new patients
    are filled from the same patients as the training cohort.
    """
    imputer = KNNImputer(n_neighbors=min(neighbours, reference.shape[0]), keep_empty_features=True)
    return imputer.fit(reference).transform(values)


def median_fill(values: np.ndarray, medians: np.ndarray) -> np.ndarray:
    """Replace missing cells by the fitted feature medians."""
    return np.where(np.isnan(values), medians[None, :], values)
