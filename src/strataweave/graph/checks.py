"""Checks of the matrices handed to graph building; each failure is one InputError line."""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from strataweave.errors import InputError
from strataweave.graph.metrics import METRICS


def check_choice(what: str, found, allowed: tuple[str, ...]) -> None:
    """InputError unless `found` is one of `allowed`."""
    if found not in allowed:
        raise InputError(f"{what}: found {found!r}; expected one of {', '.join(allowed)}")


def metric_per_modality(metric: str | Mapping[str, str], names: list[str]) -> dict[str, str]:
    """One metric name per modality, from a single name or a mapping by modality."""
    chosen = dict(metric) if isinstance(metric, Mapping) else {name: metric for name in names}
    for name in names:
        if name not in chosen:
            raise InputError(f"metric: found no entry for modality {name!r}; expected one per modality")
        check_choice(f"metric of modality {name!r}", chosen[name], METRICS)
    return {name: chosen[name] for name in names}


def checked_matrix(name: str, frame, metric: str, n_neighbours: int) -> np.ndarray:
    """The patients x features values of one modality as float64, after every check."""
    if not isinstance(frame, pd.DataFrame):
        raise InputError(f"modality {name!r}: found {type(frame).__name__}; expected a DataFrame of patients x features")
    if frame.index.has_duplicates:
        repeated = frame.index[frame.index.duplicated()][0]
        raise InputError(f"modality {name!r}, patient {repeated!r}: found it more than once; expected each patient once")
    if frame.shape[1] == 0:
        raise InputError(f"modality {name!r}: found no feature columns; expected at least one")
    matrix = _as_float(name, frame)
    bad = ~np.isfinite(matrix)
    if bad.any():
        row, col = np.argwhere(bad)[0]
        raise InputError(
            f"modality {name!r}, patient {frame.index[row]!r}, column {frame.columns[col]!r}: "
            f"found {matrix[row, col]}; expected finite numbers (impute missing values first)"
        )
    if n_neighbours >= len(frame):
        raise InputError(
            f"n_neighbours: found {n_neighbours} for modality {name!r} with {len(frame)} patients; "
            f"expected fewer than the number of patients"
        )
    _check_rows_for_metric(name, frame.index, matrix, metric)
    return matrix


def _as_float(name: str, frame: pd.DataFrame) -> np.ndarray:
    for column, dtype in frame.dtypes.items():
        if not (pd.api.types.is_numeric_dtype(dtype) and not pd.api.types.is_bool_dtype(dtype)):
            raise InputError(f"modality {name!r}, column {column!r}: found type {dtype}; expected numbers")
    return frame.to_numpy(dtype=np.float64, na_value=np.nan)


def _check_rows_for_metric(name: str, patients: pd.Index, matrix: np.ndarray, metric: str) -> None:
    if metric == "correlation":
        flat = np.ptp(matrix, axis=1) == 0
        if flat.any():
            raise InputError(
                f"modality {name!r}, patient {patients[np.argmax(flat)]!r}: found the same value in every column; "
                f"expected varying values under correlation distance (or use metric 'euclidean')"
            )
    if metric == "cosine":
        zero = ~matrix.any(axis=1)
        if zero.any():
            raise InputError(
                f"modality {name!r}, patient {patients[np.argmax(zero)]!r}: found all zeros; "
                f"expected a non-zero profile under cosine distance (or use metric 'euclidean')"
            )


def check_overlap(patient_sets: dict[str, pd.Index]) -> None:
    """InputError if two modalities have no patient in common (their graphs cannot be fused)."""
    names = list(patient_sets)
    for position, first in enumerate(names):
        for second in names[position + 1:]:
            if not patient_sets[first].isin(patient_sets[second]).any():
                raise InputError(
                    f"modalities {first!r} and {second!r}: found no patient in common; "
                    f"expected at least one shared patient to fuse their graphs"
                )
