"""Checks of identifiers and values; every failure is an InputError naming file and position."""

from __future__ import annotations

import numpy as np
import pandas as pd

from strataweave.data.cells import MISSING_TOKENS
from strataweave.data.positions import TablePositions, input_error, shown

KINDS = ("counts", "beta", "abundance", "log_expression", "copy_number")

# kind -> (lowest allowed, highest allowed, words for what is expected)
_VALUE_RANGES = {
    "counts": (0.0, np.inf, "a non-negative count"),
    "beta": (0.0, 1.0, "a beta value in [0, 1]"),
    "abundance": (0.0, np.inf, "a non-negative abundance"),
}


def check_kind(kind: str, source: str) -> str:
    """Return `kind` if it is one of KINDS, else raise naming the key."""
    if kind not in KINDS:
        raise input_error(source, "key 'kind'", shown(kind), "one of " + ", ".join(KINDS))
    return kind


def check_identifiers(raw: pd.Index, positions: TablePositions, axis: str) -> pd.Index:
    """Strip identifiers; refuse empty ones, duplicates, and ones that differ only in case.

    `axis` is "row" or "column": which side of `positions` the identifiers sit on.
    """
    name_of = positions.row if axis == "row" else positions.column
    labels = pd.Index(raw.astype(str).str.strip(), dtype=object)
    empty = np.flatnonzero(labels == "")
    if empty.size:
        raise positions.error(name_of(int(empty[0])), "an empty identifier", "a non-empty identifier")
    for key, words in ((labels, "repeats identifier"), (labels.str.casefold(), "differs only in case from")):
        repeated = np.flatnonzero(pd.Index(key).duplicated())
        if repeated.size:
            j = int(repeated[0])
            first = int(np.flatnonzero(key == key[j])[0])
            raise positions.error(
                name_of(j),
                f"{shown(labels[j])} which {words} {name_of(first)}",
                "identifiers unique (ignoring case)",
            )
    return labels


def parse_numbers(cells: np.ndarray, positions: TablePositions) -> np.ndarray:
    """Turn a 2-D array of text cells into float64; missing tokens become NaN.

    The whole table is converted in one vectorised call; the first cell that is neither a
    number nor a missing token is named in the error.
    """
    flat = pd.Series(cells.reshape(-1), dtype=object)
    text = flat.astype(str).str.strip()
    missing = flat.isna().to_numpy() | text.isin(MISSING_TOKENS).to_numpy()
    numbers = pd.to_numeric(text.where(~missing, "nan"), errors="coerce").to_numpy(dtype=np.float64)
    bad = np.flatnonzero(np.isnan(numbers) & ~missing)
    if bad.size:
        i, j = divmod(int(bad[0]), cells.shape[1])
        raise positions.error(positions.cell(i, j), shown(cells[i, j]), "a number or an empty/NA cell")
    return numbers.reshape(cells.shape)


def check_values(values: np.ndarray, positions: TablePositions, kind: str | None = None) -> None:
    """Refuse infinities, values outside the range of `kind`, and all-missing rows or columns."""
    check_range(values, positions, kind)
    observed = ~np.isnan(values)
    for axis, name_of in ((1, positions.row), (0, positions.column)):
        empty = np.flatnonzero(~observed.any(axis=axis))
        if empty.size:
            raise positions.error(name_of(int(empty[0])), "no values (all missing)", "at least one value")


def check_range(values: np.ndarray, positions: TablePositions, kind: str | None = None) -> None:
    """Refuse infinities and values outside the range of `kind` (missing cells are allowed)."""
    infinite = np.argwhere(np.isinf(values))
    if infinite.size:
        i, j = (int(v) for v in infinite[0])
        raise positions.error(positions.cell(i, j), shown(values[i, j]), "a finite number")
    if kind in _VALUE_RANGES:
        low, high, words = _VALUE_RANGES[kind]
        outside = np.argwhere((values < low) | (values > high))
        if outside.size:
            i, j = (int(v) for v in outside[0])
            raise positions.error(positions.cell(i, j), shown(values[i, j]), f"{words} (kind '{kind}')")



def _check_totals(values: np.ndarray, patients: pd.Index, source: str) -> None:
    """Refuse a patient (row) whose counts add up past the largest float: its library size would be infinite."""
    with np.errstate(over="ignore"):
        totals = np.nansum(values, axis=1)
    overflowing = np.flatnonzero(np.isinf(totals))
    if overflowing.size:
        found = f"counts that add up past the largest number a float holds ({np.finfo(np.float64).max:.3g})"
        raise input_error(source, f"patient {shown(patients[overflowing[0]])}", found, "read counts of a sequencing library")


def frame_values(frame: pd.DataFrame, positions: TablePositions) -> np.ndarray:
    """The cells of an in-memory table as float64, naming the first cell that is not a number."""
    try:
        return frame.to_numpy(dtype=np.float64, copy=True)
    except (TypeError, ValueError):
        return parse_numbers(frame.to_numpy(dtype=object), positions)


def checked_frame(frame: pd.DataFrame, source: str, kind: str | None = None, allow_empty: bool = False) -> pd.DataFrame:
    """A float64 copy of an in-memory patients x features table, validated like a file.

    Identifiers are stripped. `allow_empty` accepts all-missing rows and columns (new
    patients may lack whole features); ranges and infinities are always checked.
    """
    positions = TablePositions(source, frame.index, frame.columns)
    patients = check_identifiers(frame.index, positions, "row")
    features = check_identifiers(frame.columns, positions, "column")
    values = frame_values(frame, positions)
    if allow_empty:
        check_range(values, positions, kind)
    else:
        check_values(values, positions, kind)
    if kind == "counts":
        _check_totals(values, patients, source)
    return pd.DataFrame(values, index=pd.Index(patients, name=frame.index.name), columns=features)


def check_patient_count(count: int, minimum: int, source: str) -> None:
    """Refuse a modality with fewer than `minimum` patients."""
    if count < minimum:
        raise input_error(source, "patients", str(count), f"at least {minimum} patients")

