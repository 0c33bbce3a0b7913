"""Normalisation by kind of data, and quantile normalisation across patients.

All functions take and return patients x features float arrays; NaN marks a missing cell
and stays missing.
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy.stats import rankdata

LIBRARY_SIZES = ("median_ratio", "total")  # how log2 CPM takes each patient's library size


def log2_cpm(counts: np.ndarray, prior_count: float) -> np.ndarray:
    """log2 counts per million with a prior count, per patient (row).

    log2((count + prior) / (library + 2 * prior) * 1e6), the definition used by voom
    (Law et al. 2014, Genome Biology); the library size is the patient's total count.
    """
    library = np.nansum(counts, axis=1, keepdims=True)
    return np.log2((counts + prior_count) / (library + 2.0 * prior_count) * 1e6)


def failed_libraries(counts: np.ndarray) -> np.ndarray:
    """Patients (rows) whose median-of-ratios size factor is zero while the typical patient's is not.

    A patient with no reads on more than half of the features has a median ratio of zero to
    any reference (Anders & Huber 2010), so its profile cannot be put on the cohort's scale:
    the reads went to a few features and the library failed. Where the typical (median)
    patient also has reads on at most half of the features (sparse layers), no one is flagged.
    """
    detected = np.mean(counts > 0, axis=1)  # a missing cell (NaN) counts as no reads
    if np.median(detected) <= 0.5:
        return np.zeros(counts.shape[0], dtype=bool)
    return detected <= 0.5


def median_ratio_offsets(log_values: np.ndarray, reference: np.ndarray) -> np.ndarray:
    """Per patient (column vector), the median over features of log_values - reference.

    The size factor of the median-of-ratios method (Anders & Huber 2010, Genome Biology) on
    the log scale, with the cohort's mean log value per feature as the reference patient:
    subtracting it re-centres each patient on its typical feature, so a few features that
    take most of a patient's reads no longer shift every other feature of that patient.
    """
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # a patient with no observed feature
        offsets = np.nanmedian(log_values - reference, axis=1, keepdims=True)
    return np.nan_to_num(offsets, nan=0.0)


def m_values(beta: np.ndarray, beta_floor: float) -> np.ndarray:
    """M-values log2(beta / (1 - beta)) (Du et al. 2010, BMC Bioinformatics).

    Beta values are first clipped into [beta_floor, 1 - beta_floor] so 0 and 1 stay finite.
    """
    clipped = np.clip(beta, beta_floor, 1.0 - beta_floor)
    return np.log2(clipped) - np.log2(1.0 - clipped)


def log2_abundance(abundance: np.ndarray, log_offset: float) -> np.ndarray:
    """log2(abundance + log_offset); a value that is not positive after the offset becomes missing.

    With the default offset 0 a zero abundance counts as not detected (missing), not as -inf.
    """
    shifted = abundance + log_offset
    out = np.full(shifted.shape, np.nan)
    np.log2(shifted, out=out, where=shifted > 0)
    return out


def _sample_sorted(sorted_rows: np.ndarray, observed: np.ndarray, positions: np.ndarray) -> np.ndarray:
    """Linear interpolation of each row's sorted observed values at fractional positions in [0, 1].

    `sorted_rows` holds each row sorted ascending with NaN last; `observed` is the number
    of non-NaN values per row; `positions` broadcasts against (rows, points).
    """
    last = np.maximum(observed - 1, 0)[:, None]
    index = positions * last
    low = np.floor(index).astype(np.int64)
    high = np.minimum(low + 1, last)
    weight = index - low
    lower = np.take_along_axis(sorted_rows, low, axis=1)
    upper = np.take_along_axis(sorted_rows, high, axis=1)
    return lower + weight * (upper - lower)


def quantile_reference(values: np.ndarray) -> np.ndarray:
    """The mean sorted distribution of the patients (Bolstad et al. 2003, Bioinformatics).

    Each patient's observed values are sorted; patients with missing cells are first
    resampled onto as many evenly spaced quantiles as there are features; the reference is
    the mean across patients at each quantile.
    """
    observed = (~np.isnan(values)).sum(axis=1)
    rows = observed > 0
    n_points = values.shape[1]
    ordered = np.sort(values[rows], axis=1)
    if (observed[rows] == n_points).all():
        return ordered.mean(axis=0)
    grid = np.linspace(0.0, 1.0, n_points)[None, :]
    return _sample_sorted(ordered, observed[rows], grid).mean(axis=0)


def quantile_apply(values: np.ndarray, reference: np.ndarray) -> np.ndarray:
    """Give each observed value the reference value at its within-patient rank.

    Ties get the reference interpolated at their average rank; missing cells stay missing.
    New patients are mapped onto the fitted reference the same way.
    """
    ranks = rankdata(values, axis=1, method="average", nan_policy="omit")
    observed = (~np.isnan(values)).sum(axis=1, keepdims=True)
    last = reference.size - 1
    index = np.where(observed > 1, (ranks - 1.0) * (last / np.maximum(observed - 1, 1)), last / 2.0)
    index[np.isnan(values)] = np.nan
    return np.interp(index, np.arange(reference.size), reference)
