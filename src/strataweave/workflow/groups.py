"""Read a grouping the user brings: patient ID in the first column, group in the second."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from strataweave.data.cells import read_cells
from strataweave.errors import InputError


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
