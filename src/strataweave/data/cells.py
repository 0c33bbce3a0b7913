"""Read a table file (csv, tsv, gzip, Parquet) into text cells, keeping file positions.

Only the layout is interpreted here: leading '#' comment lines are skipped, the separator
is taken from the file name (.csv, .tsv) or sniffed from the header, and every row must
have as many fields as the header. Any failure to read is an InputError. For large
numeric matrices `quick_numbers` parses the values in one pass of pandas' C parser.
"""

from __future__ import annotations

import csv
import gzip
import io
import re
import zlib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from strataweave.data.positions import input_error

_GZIP_MAGIC = b"\x1f\x8b"
_PARQUET_MAGIC = b"PAR1"
MISSING_TOKENS = ("", "NA", "NaN", "nan", "N/A", "NULL", "null")


@dataclass(frozen=True)
class CellTable:
    """Text cells of a table file: the header row and the body, both as object arrays."""

    source: str
    header: np.ndarray
    body: np.ndarray
    first_line: int
    unit: str = "line"


@dataclass(frozen=True)
class TableText:
    """A delimited text table not yet split into cells: its lines from the header on."""

    source: str
    lines: list[str]
    first_line: int
    separator: str


def read_cells(path) -> CellTable:
    """Read `path` into a CellTable; InputError for anything that is not a rectangular table."""
    table = read_table(path)
    return table if isinstance(table, CellTable) else split_cells(table)


def read_table(path) -> TableText | CellTable:
    """Text files as TableText (decoded, comments skipped), Parquet files as CellTable."""
    source = str(path)
    try:
        raw = Path(path).read_bytes()
    except OSError as err:
        raise input_error(source, "file", f"an unreadable file ({err.strerror or err})", "a readable file") from None
    if raw.startswith(_PARQUET_MAGIC) or Path(path).suffix.lower() in (".parquet", ".pq"):
        return _parquet_cells(source, raw)
    if raw.startswith(_GZIP_MAGIC):
        try:
            raw = gzip.decompress(raw)
        except (OSError, EOFError, zlib.error):
            raise input_error(source, "file", "a damaged gzip stream", "a complete gzip file") from None
    return _table_text(source, _decode(source, raw), _separator(source))


def _decode(source: str, raw: bytes) -> str:
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        raise input_error(source, f"byte {err.start}", "bytes that are not UTF-8 text", "UTF-8 text") from None
    if "\x00" in text:
        line = text.count("\n", 0, text.index("\x00")) + 1
        raise input_error(source, f"line {line}", "a NUL byte (binary content)", "text") from None
    return text


def _separator(source: str) -> str | None:
    """',' for .csv, tab for .tsv/.tab (also under .gz); None means sniff from the header."""
    suffixes = [s.lower() for s in Path(source).suffixes]
    if ".csv" in suffixes:
        return ","
    if ".tsv" in suffixes or ".tab" in suffixes:
        return "\t"
    return None


def _table_text(source: str, text: str, separator: str | None) -> TableText:
    lines = text.replace("\r\n", "\n").replace("\r", "\n").split("\n")  # not splitlines: U+2028 is text
    skipped = 0
    while skipped < len(lines) and lines[skipped].startswith("#"):
        skipped += 1
    while lines and not lines[-1].strip():
        lines.pop()
    if len(lines) <= skipped:
        raise input_error(source, "file", "no table (empty file)", "a header line and data lines")
    if separator is None:
        separator = "\t" if "\t" in lines[skipped] else ","
    return TableText(source, lines[skipped:], first_line=skipped + 2, separator=separator)


def split_cells(text: TableText) -> CellTable:
    """Split every line into fields (CSV quoting rules); each row must match the header's width."""
    reader = csv.reader(io.StringIO("\n".join(text.lines)), delimiter=text.separator, strict=True)
    rows, row_start = [], 1
    try:
        for row in reader:
            rows.append(row)
            row_start = reader.line_num + 1
    except csv.Error as error:
        if "end of data" in str(error):  # a quote left open runs to the end: name the line it opened on
            where, found = row_start, "a quote that is never closed"
        else:
            where, found = reader.line_num, "malformed quoting"
        raise input_error(text.source, f"line {text.first_line - 2 + where}", found, "fields quoted in CSV style") from None
    _require_full_rows(text.source, rows, header_line=text.first_line - 1)
    cells = np.empty((len(rows), len(rows[0])), dtype=object)
    cells[:] = rows
    return CellTable(text.source, cells[0], cells[1:], first_line=text.first_line)


def quick_numbers(text: TableText) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """Header, first-column labels and float values via pandas' C parser, or None.

    The fast path for large matrices. None (take the slow path, which names the faulty
    line or cell) when the table has quotes, uneven rows, or a value column that is not
    entirely numbers and missing tokens.
    """
    separator = text.separator
    if len(text.lines) < 2 or any('"' in line for line in text.lines):
        return None
    widths = pd.Series(text.lines).str.count(re.escape(separator)).to_numpy()
    if (widths != widths[0]).any() or widths[0] == 0:
        return None
    width = int(widths[0]) + 1
    try:
        frame = pd.read_csv(
            io.StringIO("\n".join(text.lines[1:])),
            sep=separator,
            header=None,
            names=range(width),
            dtype={0: str},
            na_values={j: list(MISSING_TOKENS) for j in range(1, width)},
            keep_default_na=False,
            quoting=csv.QUOTE_NONE,
            engine="c",
        )
    except (ValueError, pd.errors.ParserError):
        return None
    values = frame.iloc[:, 1:]
    if not all(dtype.kind in "iuf" for dtype in values.dtypes) or frame[0].isna().any():
        return None
    header = np.array(text.lines[0].split(separator), dtype=object)
    return header, frame[0].to_numpy(dtype=object), values.to_numpy(dtype=np.float64)


def _require_full_rows(source: str, rows: list[list[str]], header_line: int) -> None:
    """Every row must have as many fields as the header: name the first that does not."""
    lengths = np.fromiter(map(len, rows), dtype=np.int64, count=len(rows))
    uneven = np.flatnonzero(lengths != lengths[0])
    if uneven.size:
        i = int(uneven[0])
        raise input_error(
            source, f"line {header_line + i}", f"{lengths[i]} fields", f"{lengths[0]} fields like the header"
        )


def _parquet_cells(source: str, raw: bytes) -> CellTable:
    try:
        frame = pd.read_parquet(io.BytesIO(raw))
    except ImportError:
        raise input_error(source, "file", "a Parquet file", "pyarrow installed to read Parquet") from None
    except Exception as err:  # pyarrow raises many types for damaged files; all mean bad input
        raise input_error(source, "file", f"an unreadable Parquet file ({type(err).__name__})", "a valid Parquet file") from None
    if not isinstance(frame.index, pd.RangeIndex):
        frame = frame.reset_index()
    header = np.array([str(c) for c in frame.columns], dtype=object)
    body = frame.astype(object).where(frame.notna(), "").to_numpy(dtype=object)
    return CellTable(source, header, body, first_line=1, unit="row")
