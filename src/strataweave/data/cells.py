"""Read a table file (csv, tsv, gzip, Parquet) into text cells, keeping file positions.

Nothing is interpreted here except the layout: leading '#' comment lines are skipped,
the separator is taken from the file name (.csv, .tsv) or sniffed from the header, and
every row must have as many fields as the header. Any failure to read is an InputError.
"""

from __future__ import annotations

import csv
import gzip
import io
import zlib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from strataweave.data.positions import input_error

_GZIP_MAGIC = b"\x1f\x8b"
_PARQUET_MAGIC = b"PAR1"


@dataclass(frozen=True)
class CellTable:
    """Text cells of a table file: the header row and the body, both as object arrays."""

    source: str
    header: np.ndarray
    body: np.ndarray
    first_line: int
    unit: str = "line"


def read_cells(path) -> CellTable:
    """Read `path` into a CellTable; InputError for anything that is not a rectangular table."""
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
    return _text_cells(source, _decode(source, raw), _separator(source))


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


def _text_cells(source: str, text: str, separator: str | None) -> CellTable:
    lines = text.splitlines()
    skipped = 0
    while skipped < len(lines) and lines[skipped].startswith("#"):
        skipped += 1
    while lines and not lines[-1].strip():
        lines.pop()
    if len(lines) <= skipped:
        raise input_error(source, "file", "no table (empty file)", "a header line and data lines")
    header_line = lines[skipped]
    if separator is None:
        separator = "\t" if "\t" in header_line else ","
    reader = csv.reader(io.StringIO("\n".join(lines[skipped:])), delimiter=separator, strict=True)
    try:
        rows = list(reader)
    except csv.Error:
        where = f"line {skipped + reader.line_num}"
        raise input_error(source, where, "malformed quoting", "fields quoted in CSV style") from None
    _require_full_rows(source, rows, header_line=skipped + 1)
    cells = np.empty((len(rows), len(rows[0])), dtype=object)
    cells[:] = rows
    return CellTable(source, cells[0], cells[1:], first_line=skipped + 2)


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
