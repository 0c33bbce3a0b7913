"""Validation of survival outcome columns: times non-negative, events 0/1, missing rows counted."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from strataweave.errors import InputError


@dataclass(frozen=True)
class Outcome:
    """Follow-up time (float) and event flag (0/1 float) per patient, plus what was excluded."""

    time: pd.Series
    event: pd.Series
    n_missing: int


def _shown(value: object) -> str:
    """A cell as the user wrote it: numpy scalars shown as plain Python values."""
    return repr(value.item() if hasattr(value, "item") else value)


def _event_flags(values: pd.Series, column: str) -> pd.Series:
    if values.dtype == bool:
        return values.astype(float)
    numeric = pd.to_numeric(values, errors="coerce")
    bad = numeric.isna() | ~numeric.isin([0, 1])
    if bad.any():
        patient = values.index[bad.to_numpy()][0]
        raise InputError(
            f"clinical table, row {patient!r}, column {column!r}: found {_shown(values[patient])}, expected 0, 1, True or False"
        )
    return numeric.astype(float)


def read_outcome(clinical: pd.DataFrame, time_column: str, event_column: str) -> Outcome:
    """Time and event from `clinical`; patients missing either are dropped and counted.

    Raises InputError for a missing column, a negative or non-numeric time, or an event that is not 0/1.
    """
    for column in (time_column, event_column):
        if column not in clinical.columns:
            raise InputError(f"clinical table: no column {column!r}, expected it to hold the survival outcome")
    complete = clinical[[time_column, event_column]].dropna()
    time = pd.to_numeric(complete[time_column], errors="coerce")
    bad = time.isna() | (time < 0) | ~np.isfinite(time.fillna(0))
    if bad.any():
        patient = time.index[bad.to_numpy()][0]
        raise InputError(
            f"clinical table, row {patient!r}, column {time_column!r}: found {_shown(complete.loc[patient, time_column])}, "
            "expected a non-negative follow-up time"
        )
    event = _event_flags(complete[event_column], event_column)
    return Outcome(time=time.astype(float), event=event, n_missing=len(clinical) - len(complete))
