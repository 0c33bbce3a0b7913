"""Consensus matrix from resample labels (Monti et al. 2003, Machine Learning).

Entry (i, j) is the share of the resamples that drew both patients i and j in which the two
fell in one subtype. Pairs never drawn together have no evidence and are NaN. The matrix is
dense float32: about 100 MB per count at 5,000 patients, which is the practical limit.
"""

from __future__ import annotations

import numpy as np

from strataweave.errors import InputError

NOT_DRAWN = -1


def _checked_labels(resample_labels: np.ndarray) -> np.ndarray:
    labels = np.asarray(resample_labels)
    if labels.ndim != 2 or labels.shape[0] == 0 or not np.issubdtype(labels.dtype, np.integer):
        raise InputError(
            f"resample labels: found array of shape {labels.shape} and dtype {labels.dtype}; "
            f"expected a 2-D integer array (resamples x patients, {NOT_DRAWN} = not drawn)"
        )
    if labels.min() < NOT_DRAWN:
        raise InputError(
            f"resample labels: found label {labels.min()}; expected subtype labels >= 0 or {NOT_DRAWN} for not drawn"
        )
    return labels


def consensus_matrix(resample_labels: np.ndarray) -> np.ndarray:
    """N x N float32 consensus from an R x N label array (``-1`` marks patients not drawn).

    Computed with indicator matrices: co-sampled counts are ``D.T @ D`` for the R x N drawn
    indicator D, co-clustered counts ``H @ H.T`` for the N x (R * K) one-hot of (resample,
    subtype). No loop over patients.
    """
    labels = _checked_labels(resample_labels)
    n_resamples, n_patients = labels.shape
    drawn = (labels != NOT_DRAWN).astype(np.float32)
    n_columns = int(labels.max()) + 1
    one_hot = np.zeros((n_patients, n_resamples * max(n_columns, 1)), dtype=np.float32)
    resample_of, patient_of = np.nonzero(labels != NOT_DRAWN)
    one_hot[patient_of, resample_of * n_columns + labels[resample_of, patient_of]] = 1.0
    together = one_hot @ one_hot.T
    sampled = drawn.T @ drawn
    with np.errstate(invalid="ignore", divide="ignore"):
        consensus = np.where(sampled > 0, together / sampled, np.nan).astype(np.float32)
    return consensus


def consensus_with_subtypes(consensus: np.ndarray, labels: np.ndarray) -> np.ndarray:
    """N x K mean consensus of each patient with the members of each subtype (self excluded).

    Undefined pairs (never drawn together) are left out of the means; a patient with no defined
    pair in a subtype gets NaN there.
    """
    labels = np.asarray(labels)
    subtypes, codes = np.unique(labels, return_inverse=True)
    members = np.zeros((labels.size, subtypes.size), dtype=np.float32)
    members[np.arange(labels.size), codes] = 1.0
    defined = np.isfinite(consensus)
    np.fill_diagonal(defined, False)
    values = np.where(defined, consensus, 0.0).astype(np.float32)
    sums = values @ members
    counts = defined.astype(np.float32) @ members
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(counts > 0, sums / counts, np.nan)


def core_flags(consensus: np.ndarray, labels: np.ndarray, threshold: float) -> tuple[np.ndarray, np.ndarray]:
    """Each patient's mean consensus with its own subtype, and whether that exceeds `threshold`.

    Core patients are those the resamples keep with their subtype-mates; the rest sit between
    subtypes and deserve care when the subtypes are described.
    """
    labels = np.asarray(labels)
    with_subtypes = consensus_with_subtypes(consensus, labels)
    _, codes = np.unique(labels, return_inverse=True)
    own = with_subtypes[np.arange(labels.size), codes]
    return own, np.nan_to_num(own, nan=0.0) > threshold
