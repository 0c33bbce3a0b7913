"""Safe file writing shared by every layer that writes: temp name + rename, guarded tables."""

from __future__ import annotations

import hashlib
import io
import json
import os
import tempfile
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd

from strataweave.errors import DamagedFileError

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
    except BaseException as error:
        Path(tmp).unlink(missing_ok=True)
        if isinstance(error, OSError) and error.filename is None:  # a failed write names no file: name ours
            raise OSError(error.errno, error.strerror, str(path)) from error
        raise


def atomic_write_text(path: str | os.PathLike, text: str) -> None:
    """Text version of :func:`atomic_write_bytes` (UTF-8)."""
    atomic_write_bytes(path, text.encode("utf-8"))


def _npz_bytes(arrays: dict[str, np.ndarray]) -> bytes:
    buffer = io.BytesIO()
    np.savez(buffer, **arrays)
    return buffer.getvalue()


def atomic_write_arrays(path: str | os.PathLike, arrays: dict[str, np.ndarray]) -> None:
    """Named arrays as one `.npz` (read back with `allow_pickle=False`), written atomically."""
    atomic_write_bytes(path, _npz_bytes(arrays))


CHECKSUMS = "checksums"


def _record_digest(record: dict) -> str:
    text = json.dumps(record, sort_keys=True, separators=(",", ":"), allow_nan=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def write_checked(json_path: Path, npz_path: Path, record: dict, arrays: dict[str, np.ndarray], indent=None) -> None:
    """`arrays` as an `.npz`, then `record` as JSON carrying the sha256 of both (each file written atomically)."""
    data = _npz_bytes(arrays)
    atomic_write_bytes(npz_path, data)
    sums = {"arrays": hashlib.sha256(data).hexdigest(), "record": _record_digest(record)}
    atomic_write_text(json_path, json.dumps({**record, CHECKSUMS: sums}, indent=indent, allow_nan=True) + "\n")


def read_checked(json_path: Path, npz_path: Path) -> tuple[dict, dict[str, np.ndarray]]:
    """The record and arrays `write_checked` wrote; DamagedFileError naming the file that does not read back.

    A record without checksums (written before they were kept) is read unchecked.
    """
    try:
        record = json.loads(json_path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError) as error:
        raise DamagedFileError(json_path, f"unreadable ({getattr(error, 'strerror', None) or error})") from None
    except ValueError as error:
        raise DamagedFileError(json_path, f"not valid JSON ({error})") from None
    if not isinstance(record, dict):
        raise DamagedFileError(json_path, f"holds a JSON {type(record).__name__}, not an object")
    sums = record.pop(CHECKSUMS, None)
    if sums is not None and (not isinstance(sums, dict) or sums.get("record") != _record_digest(record)):
        raise DamagedFileError(json_path, "checksum differs from the content (changed or damaged since written)")
    try:
        data = npz_path.read_bytes()
    except OSError as error:
        raise DamagedFileError(npz_path, f"unreadable ({error.strerror or error})") from None
    if sums is not None and sums.get("arrays") != hashlib.sha256(data).hexdigest():
        raise DamagedFileError(npz_path, "checksum differs from the one recorded beside it (changed or damaged since written)")
    try:
        with np.load(io.BytesIO(data), allow_pickle=False) as archive:
            return record, {name: archive[name] for name in archive.files}
    except (OSError, ValueError, EOFError, zipfile.BadZipFile) as error:
        raise DamagedFileError(npz_path, f"not a readable array archive ({error})") from None


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
