"""Readers for the clinical table, a grouping and one omics matrix, validated and turned to patients x features."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from strataweave.data.annotated import is_annotated, read_annotated_matrix, read_annotated_obs
from strataweave.data.cells import MISSING_TOKENS, TableText, quick_numbers, read_cells, read_table, split_cells
from strataweave.data.positions import TablePositions, input_error, shown
from strataweave.data.validation import check_identifiers, check_kind, check_values, parse_numbers
from strataweave.errors import InputError

ORIENTATIONS = ("features_in_rows", "samples_in_rows")


def read_clinical(path, id_column: str) -> pd.DataFrame:
    """The clinical table indexed by stripped string patient IDs.

    Columns whose every present cell is a number become float64 (missing cells NaN);
    other columns keep their stripped text (missing cells None). An .h5ad or .h5mu file gives
    its `obs`, indexed by its patient IDs (`id_column` is not needed there).
    """
    if is_annotated(path):
        obs = read_annotated_obs(path)
        check_identifiers(obs.index, TablePositions(str(path), obs.index, obs.columns), "row")
        return obs
    table = read_cells(path)
    if table.body.shape[0] == 0:
        raise input_error(table.source, "file", "a header and no data rows", "one row per patient")
    header = pd.Index([str(h).strip() for h in table.header], dtype=object)
    header_positions = TablePositions(table.source, pd.Index(["header"]), header, table.first_line - 1, table.unit)
    check_identifiers(header, header_positions, "column")
    if id_column not in header:
        raise input_error(table.source, f"line {table.first_line - 1} (header)",
                          "columns " + ", ".join(shown(h) for h in header[:8]),
                          f"a column named {shown(id_column)}")
    id_at = header.get_loc(id_column)
    positions = TablePositions(table.source, pd.Index(table.body[:, id_at]), header, table.first_line, table.unit)
    patients = check_identifiers(pd.Index(table.body[:, id_at]), positions, "row")
    columns = {name: _clinical_column(table.body[:, j]) for j, name in enumerate(header) if j != id_at}
    return pd.DataFrame(columns, index=pd.Index(patients, name=id_column))


def _clinical_column(cells: np.ndarray) -> np.ndarray:
    """Numbers if every present cell parses as one, otherwise stripped text."""
    text = pd.Series(cells, dtype=object).str.strip()
    missing = text.isin(MISSING_TOKENS)
    numbers = pd.to_numeric(text.where(~missing, "nan"), errors="coerce")
    if not (numbers.isna() & ~missing).any():
        return numbers.to_numpy(dtype=np.float64)
    return text.where(~missing, None).to_numpy(dtype=object)


def read_groups(path: str | Path) -> pd.Series:
    """Group label (text) per patient ID; rows with an empty group are left out."""
    table = read_cells(path)
    source = table.source
    if table.header.size < 2:
        raise InputError(f"{source}: header has {table.header.size} column(s), expected patient ID then group")
    ids = pd.Index([str(cell).strip() for cell in table.body[:, 0]], name="patient_id")
    labels = pd.Series([str(cell).strip() for cell in table.body[:, 1]], index=ids, name=str(table.header[1]).strip())
    empty_id = ids == ""
    if empty_id.any():
        line = table.first_line + int(empty_id.argmax())
        raise InputError(f"{source}: line {line}, column 1: found an empty patient ID, expected an identifier")
    repeated = ids.duplicated()
    if repeated.any():
        line = table.first_line + int(repeated.argmax())
        raise InputError(f"{source}: line {line}, column 1: found patient {ids[repeated][0]!r} again, expected each once")
    labels = labels[labels != ""]
    if labels.nunique() < 2:
        raise InputError(f"{source}: column 2: found {labels.nunique()} distinct group(s), expected at least 2")
    return labels


def read_matrix(
    path,
    orientation: str | None = None,
    known_ids: Iterable[str] | None = None,
    name: str | None = None,
    kind: str | None = None,
) -> pd.DataFrame:
    """One omics matrix as patients x features (float64), validated.

    `orientation` says whether the file holds features in rows or samples in rows; when
    it is None it is detected by matching the row and column identifiers to `known_ids`
    (usually the clinical patient IDs). Identifiers are stripped of surrounding
    whitespace. When `kind` is given, values are checked against its range (counts and
    abundances non-negative, beta values in [0, 1]). An .h5ad file gives its `X`, an .h5mu the
    `X` of its modality `name` (patients in rows there, so `orientation` is not needed).
    """
    if is_annotated(path):
        return _annotated_matrix(path, orientation, name, kind)
    parts = _matrix_parts(path)
    source = parts.source if name is None else f"{parts.source} (modality {shown(name)})"
    if kind is not None:
        check_kind(kind, source)
    positions = TablePositions(source, pd.Index(parts.labels), pd.Index(parts.header[1:]), parts.first_line, parts.unit)
    rows = check_identifiers(positions.row_labels, positions, "row")
    columns = check_identifiers(positions.column_labels, positions, "column")
    orientation = _orientation(orientation, rows, columns, known_ids, source)
    values = parts.values if parts.values is not None else parse_numbers(parts.cells, positions)
    check_values(values, positions, kind)
    frame = pd.DataFrame(values, index=rows, columns=columns)
    if orientation == "features_in_rows":
        frame = frame.T
    frame.index.name = "patient_id"
    frame.columns.name = "feature"
    return frame


def _annotated_matrix(path, orientation: str | None, name: str | None, kind: str | None) -> pd.DataFrame:
    source = f"{path} (modality {shown(name)})" if name is not None else str(path)
    if orientation not in (None, "samples_in_rows"):
        raise input_error(source, "key 'orientation'", shown(orientation), "samples_in_rows or none for AnnData files")
    if kind is not None:
        check_kind(kind, source)
    frame = read_annotated_matrix(path, name)
    positions = TablePositions(source, frame.index, frame.columns)
    frame.index = pd.Index(check_identifiers(frame.index, positions, "row"), name="patient_id")
    frame.columns = pd.Index(check_identifiers(frame.columns, positions, "column"), name="feature")
    check_values(frame.to_numpy(), positions, kind)
    return frame


@dataclass(frozen=True)
class _MatrixParts:
    """A matrix file split into header, first-column labels and values (floats or text cells)."""

    source: str
    header: np.ndarray
    labels: np.ndarray
    values: np.ndarray | None
    cells: np.ndarray | None
    first_line: int
    unit: str


def _matrix_parts(path) -> _MatrixParts:
    """The fast numeric parser where it applies, else text cells for the checks that name positions."""
    table = read_table(path)
    if isinstance(table, TableText):
        quick = quick_numbers(table)
        if quick is not None:
            return _MatrixParts(table.source, *quick, None, table.first_line, "line")
        table = split_cells(table)
    if table.body.shape[0] == 0 or table.header.size < 2:
        raise input_error(table.source, "file", f"{table.body.shape[0]} data rows and {table.header.size} columns",
                          "a header, at least one data row and at least two columns")
    return _MatrixParts(table.source, table.header, table.body[:, 0], None, table.body[:, 1:], table.first_line,
                        table.unit)


def _orientation(given, rows: pd.Index, columns: pd.Index, known_ids, source: str) -> str:
    """The given orientation, or the side whose identifiers match more of `known_ids`."""
    if given is not None:
        if given not in ORIENTATIONS:
            raise input_error(source, "key 'orientation'", shown(given), "one of " + ", ".join(ORIENTATIONS))
        return given
    if known_ids is None:
        raise input_error(source, "key 'orientation'", "no orientation and no patient IDs to detect it",
                          "an orientation or the clinical patient IDs")
    known = pd.Index(list(known_ids), dtype=object).astype(str).str.strip().str.casefold()
    in_rows = int(rows.str.casefold().isin(known).sum())
    in_columns = int(columns.str.casefold().isin(known).sum())
    if in_rows == in_columns:
        raise input_error(source, "orientation",
                          f"{in_rows} of {rows.size} row IDs and {in_columns} of {columns.size} column IDs "
                          "among the patient IDs",
                          "patient IDs on one side only; give the orientation")
    return "samples_in_rows" if in_rows > in_columns else "features_in_rows"

