"""Safe file writing shared by every layer that writes: temp name + rename, guarded tables."""

from __future__ import annotations

import hashlib
import io
import os
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

_FORMULA_STARTS = ("=", "+", "-", "@")


def _current_umask() -> int:
    """The process umask (reading it requires setting it; it is restored at once)."""
    mask = os.umask(0)
    os.umask(mask)
    return mask


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> None:
    """Write `data` to a temporary file beside `path`, then rename it into place."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.chmod(tmp, 0o666 & ~_current_umask())  # mkstemp makes 0600; give the usual mode
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def atomic_write_text(path: str | os.PathLike, text: str) -> None:
    """Text version of :func:`atomic_write_bytes` (UTF-8)."""
    atomic_write_bytes(path, text.encode("utf-8"))


def atomic_write_arrays(path: str | os.PathLike, arrays: dict[str, np.ndarray]) -> None:
    """Named arrays as one `.npz` (read back with `allow_pickle=False`), written atomically."""
    buffer = io.BytesIO()
    np.savez(buffer, **arrays)
    atomic_write_bytes(path, buffer.getvalue())


def guard_cell(value: object) -> object:
    """Prefix text that a spreadsheet would run as a formula with a single quote.

    Numbers are left alone: a negative number is data, not a formula.
    """
    if isinstance(value, str) and value.startswith(_FORMULA_STARTS):
        try:
            float(value)
            return value
        except ValueError:
            return "'" + value
    return value


def guarded(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy of `frame` whose text cells, index and column names cannot run as formulas."""
    out = frame.copy()
    for column in out.columns:
        if out[column].dtype == object:
            out[column] = out[column].map(guard_cell)
    out.columns = [guard_cell(str(c)) for c in out.columns]
    if out.index.dtype == object:
        out.index = out.index.map(guard_cell)
    return out


def write_table(
    frame: pd.DataFrame,
    path: str | os.PathLike,
    *,
    index: bool = False,
    comment: str | None = None,
    float_format: str = "%.6g",
) -> None:
    """Write a tab-separated table for people: header, guarded cells, optional '# ' comment line."""
    body = guarded(frame).to_csv(sep="\t", index=index, float_format=float_format, lineterminator="\n")
    prefix = f"# {comment}\n" if comment else ""
    atomic_write_text(path, prefix + body)


def sha256_file(path: str | os.PathLike) -> str:
    """Hex sha256 of a file, read in blocks."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()
