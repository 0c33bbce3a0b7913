"""Consensus from resample labels (Monti et al. 2003, Machine Learning), in row blocks.

Entry (i, j) is the share of the resamples that drew both patients i and j in which the two
fell in one subtype. Pairs never drawn together have no evidence and are NaN. The entries
come from co-clustering counts, one matrix product per block of rows, so no N x N array is
needed: PAC and each patient's mean consensus with each subtype are gathered over all pairs,
block by block, and memory grows as N. The matrix itself is kept whole up to `KEPT_SIDE`
patients; above that, over a seeded sample of that many (for the cophenetic correlation and
the figure).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from strataweave.errors import InputError

NOT_DRAWN = -1
#: Largest cohort whose whole consensus matrix is kept (float32: 100 MB per count).
KEPT_SIDE = 5_000
#: Consensus entries computed at once (float32, 128 MB; three such arrays live per block).
BLOCK_ENTRIES = 2**25


def check_window(window: tuple[float, float]) -> tuple[float, float]:
    """The PAC window (lower, upper) with 0 <= lower < upper <= 1, or an InputError."""
    try:
        lower, upper = (float(v) for v in window)
    except (TypeError, ValueError):
        raise InputError(f"pac_window: found {window!r}; expected two numbers (lower, upper)") from None
    if not 0.0 <= lower < upper <= 1.0:
        raise InputError(f"pac_window: found ({lower}, {upper}); expected 0 <= lower < upper <= 1")
    return lower, upper


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


class CoClustering:
    """One count's resample labels as indicator matrices whose products give consensus rows.

    Co-sampled counts are ``D @ D.T`` for the N x R drawn indicator D, co-clustered counts
    ``H @ H.T`` for the N x (R * K) one-hot H of (resample, subtype). No loop over patients.
    """

    def __init__(self, resample_labels: np.ndarray):
        labels = _checked_labels(resample_labels)
        n_resamples, self.n_patients = labels.shape
        self._drawn = (labels != NOT_DRAWN).astype(np.float32).T
        n_columns = max(int(labels.max()) + 1, 1)
        self._one_hot = np.zeros((self.n_patients, n_resamples * n_columns), dtype=np.float32)
        resample_of, patient_of = np.nonzero(labels != NOT_DRAWN)
        self._one_hot[patient_of, resample_of * n_columns + labels[resample_of, patient_of]] = 1.0

    def rows(self, rows: slice | np.ndarray, columns: slice | np.ndarray = slice(None)) -> np.ndarray:
        """float32 consensus of the patients at `rows` with those at `columns` (NaN: never drawn together)."""
        together = self._one_hot[rows] @ self._one_hot[columns].T
        sampled = self._drawn[rows] @ self._drawn[columns].T
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(sampled > 0, together / sampled, np.nan).astype(np.float32)

    def upper_blocks(self) -> Iterator[tuple[int, np.ndarray]]:
        """(first row a, consensus of rows a..b with patients a..N) for consecutive row blocks of
        at most BLOCK_ENTRIES entries: each pair once (or twice inside the block's own square)."""
        step = max(1, BLOCK_ENTRIES // max(self.n_patients, 1))
        for start in range(0, self.n_patients, step):
            yield start, self.rows(slice(start, min(start + step, self.n_patients)), slice(start, None))


def consensus_matrix(resample_labels: np.ndarray) -> np.ndarray:
    """N x N float32 consensus from an R x N label array (``-1`` marks patients not drawn)."""
    return CoClustering(resample_labels).rows(slice(None))


def kept_patients(n_patients: int, seed: int | None) -> np.ndarray:
    """Positions of the patients whose consensus matrix is kept: all of them up to KEPT_SIDE,
    above that a seeded sample of KEPT_SIDE, in patient order."""
    if n_patients <= KEPT_SIDE:
        return np.arange(n_patients)
    return np.sort(np.random.default_rng(seed).choice(n_patients, KEPT_SIDE, replace=False))


@dataclass(frozen=True)
class ConsensusSummary:
    """What the sweep keeps of one count's consensus, gathered in one pass over row blocks.

    pac: share of the patient pairs drawn together at least once whose consensus lies in
    (lower, upper] (Senbabaoglu et al. 2014, Scientific Reports; NaN without such pairs).
    with_subtypes: N x K mean consensus of each patient with each subtype's members, self
    excluded (NaN where the patient was never drawn with any of them).
    own: N, each patient's column of `with_subtypes` for its own subtype.
    matrix: the consensus among the kept patients (kept x kept).
    """

    pac: float
    with_subtypes: np.ndarray
    own: np.ndarray
    matrix: np.ndarray

    def core(self, threshold: float) -> np.ndarray:
        """Whether each patient's mean consensus with its own subtype exceeds `threshold`.

        Core patients are those the resamples keep with their subtype-mates; the rest sit
        between subtypes and deserve care when the subtypes are described.
        """
        return np.nan_to_num(self.own, nan=0.0) > threshold


def summarise_consensus(
    resample_labels: np.ndarray, labels: np.ndarray, window: tuple[float, float] = (0.1, 0.9),
    kept: np.ndarray | None = None,
) -> ConsensusSummary:
    """PAC over `window`, the consensus with each subtype of `labels`, and the matrix among `kept`
    patients (default: all), without ever holding more than one block of consensus rows."""
    lower, upper = check_window(window)
    co_clustering = CoClustering(resample_labels)
    n = co_clustering.n_patients
    kept = np.arange(n) if kept is None else np.asarray(kept)
    subtypes, codes = np.unique(np.asarray(labels), return_inverse=True)
    members = np.zeros((n, subtypes.size), dtype=np.float32)
    members[np.arange(n), codes] = 1.0
    sums = np.zeros((n, subtypes.size), dtype=np.float32)
    counts = np.zeros_like(sums)
    matrix = np.empty((kept.size, kept.size), dtype=np.float32)
    ambiguous = defined_pairs = 0
    for start, block in co_clustering.upper_blocks():
        height = block.shape[0]
        stop = start + height
        defined = np.isfinite(block)
        later = np.arange(block.shape[1])[None, :] > np.arange(height)[:, None]  # each pair once
        ambiguous += np.count_nonzero((block > lower) & (block <= upper) & later)
        defined_pairs += np.count_nonzero(defined & later)
        defined[np.arange(height), np.arange(height)] = False
        values = np.where(defined, block, 0.0).astype(np.float32)
        weights = defined.astype(np.float32)
        # rows a..b take every pair with patients a..N; patients b..N take their pairs with rows a..b
        sums[start:stop] += values @ members[start:]
        counts[start:stop] += weights @ members[start:]
        sums[stop:] += values[:, height:].T @ members[start:stop]
        counts[stop:] += weights[:, height:].T @ members[start:stop]
        rows, columns = np.flatnonzero((kept >= start) & (kept < stop)), np.flatnonzero(kept >= start)
        square = block[np.ix_(kept[rows] - start, kept[columns] - start)]
        matrix[np.ix_(rows, columns)] = square
        matrix[np.ix_(columns, rows)] = square.T
    with np.errstate(invalid="ignore", divide="ignore"):
        with_subtypes = np.where(counts > 0, sums / counts, np.nan)
    pac = ambiguous / defined_pairs if defined_pairs else float("nan")
    return ConsensusSummary(float(pac), with_subtypes, with_subtypes[np.arange(n), codes], matrix)
