"""Filling missing cells within one modality: k nearest patients, or the feature median."""

from __future__ import annotations

import numpy as np
from sklearn.impute import KNNImputer

IMPUTERS = ("knn", "median", "none")
#: Most patients a k-nearest-neighbour fill draws its donors from: the fill costs rows x donors x
#: features, so above this an evenly spaced sample (in patient order) keeps it linear in N.
MAX_DONORS = 5_000


def donor_rows(n_patients: int) -> np.ndarray:
    """Positions of the patients that donate values to a k-nearest-neighbour fill: all of them
    up to MAX_DONORS, else MAX_DONORS evenly spaced ones."""
    if n_patients <= MAX_DONORS:
        return np.arange(n_patients)
    return np.unique(np.linspace(0, n_patients - 1, MAX_DONORS).round().astype(np.int64))


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
