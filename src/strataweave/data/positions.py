"""Where a cell, row or column of a table sits, in words a user can find in the file."""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from strataweave.errors import InputError

_SHOWN_CHARS = 40


def shown(value: object) -> str:
    """A short, one-line quoted rendering of a found value for an error message."""
    text = str(value)
    if len(text) > _SHOWN_CHARS:
        text = text[:_SHOWN_CHARS] + "..."
    return repr(text)


@dataclass(frozen=True)
class TablePositions:
    """Names positions of a table read from `source`.

    `first_line` is the file line of the first data row (the header is the line before);
    `None` means the table came from memory and positions are named by labels only.
    `unit` is the word for a row position ("line" for text files, "row" for Parquet).
    """

    source: str
    row_labels: pd.Index
    column_labels: pd.Index
    first_line: int | None = None
    unit: str = "line"

    def row(self, i: int) -> str:
        label = shown(self.row_labels[i])
        if self.first_line is None:
            return f"row {label}"
        return f"{self.unit} {self.first_line + i} (row {label})"

    def column(self, j: int) -> str:
        return f"column {shown(self.column_labels[j])}"

    def cell(self, i: int, j: int) -> str:
        return f"{self.row(i)}, {self.column(j)}"

    def error(self, where: str, found: str, expected: str) -> InputError:
        """An InputError naming this table, the position, what was found and what was expected."""
        return input_error(self.source, where, found, expected)


def input_error(source: str, where: str, found: str, expected: str) -> InputError:
    """One-line InputError: '<source>: <where>: found <found>; expected <expected>'."""
    message = f"{source}: {where}: found {found}; expected {expected}"
    return InputError(" ".join(message.split()))
