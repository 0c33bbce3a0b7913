"""The stage cache in `<run>/stages/`: one JSON + one `.npz` per finished stage result.

A result is stored under a key: the sha256 of the stage name, its parameters and the
keys of the stages it reads, so changing one parameter changes the keys of exactly the
stages that depend on it. The `.npz` is written first and the JSON last, each atomically,
so a result counts as finished only once its JSON exists; the JSON carries the sha256 of
both, so an entry damaged later is told apart from a good one. Arrays are read back with
`allow_pickle=False`; nothing is ever unpickled.
"""

from __future__ import annotations

import hashlib
import json
import shutil
from pathlib import Path

from strataweave.errors import DamagedFileError
from strataweave.files import read_checked, write_checked
from strataweave.workflow.codec import decode, encode

CACHE_FORMAT = 2


def _plain(obj: object) -> object:
    """JSON-ready form of a parameter value (paths as text, tuples as lists)."""
    if isinstance(obj, dict):
        return {str(k): _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, Path):
        return str(obj)
    return obj


def stage_key(stage: str, parameters: dict, upstream: dict[str, str]) -> str:
    """Hex sha256 identifying one stage result by what it was computed from."""
    identity = {"format": CACHE_FORMAT, "stage": stage, "parameters": _plain(parameters), "upstream": upstream}
    text = json.dumps(identity, sort_keys=True, separators=(",", ":"), allow_nan=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


class StageCache:
    """Finished stage results of one run folder."""

    def __init__(self, folder: str | Path) -> None:
        self.folder = Path(folder)

    def _paths(self, stage: str, key: str) -> tuple[Path, Path]:
        stem = self.folder / f"{stage}-{key[:16]}"
        return stem.with_suffix(".json"), stem.with_suffix(".npz")

    def work_folder(self, stage: str, key: str) -> Path:
        """Where an unfinished stage keeps partial work across interruptions (gone once the stage is saved)."""
        return self.folder / f"{stage}-{key[:16]}.work"

    def has(self, stage: str, key: str) -> bool:
        """Whether an entry for `key` was finished (it may still turn out damaged when loaded)."""
        return self._paths(stage, key)[0].is_file()

    def save(self, stage: str, key: str, result: object) -> None:
        """Store a stage result under its key: the JSON tree last, so a half-written entry never counts."""
        tree, arrays = encode(result)
        json_path, npz_path = self._paths(stage, key)
        write_checked(json_path, npz_path, {"stage": stage, "key": key, "result": tree}, arrays)
        shutil.rmtree(self.work_folder(stage, key), ignore_errors=True)

    def load(self, stage: str, key: str) -> object:
        """The stage result stored under `key`; DamagedFileError if the entry does not read back as written."""
        json_path, npz_path = self._paths(stage, key)
        record, arrays = read_checked(json_path, npz_path)
        if record.get("key") != key or "result" not in record:
            raise DamagedFileError(json_path, f"holds no result for key {key[:16]}")
        try:
            return decode(record["result"], arrays)
        except (KeyError, TypeError, ValueError, AttributeError) as error:
            raise DamagedFileError(json_path, f"does not match its arrays ({type(error).__name__}: {error})") from None

    def prune(self, keep: dict[str, str]) -> None:
        """Delete cached results whose key is not the current key of their stage, and all partial work."""
        for path in self.folder.glob("*.work"):
            shutil.rmtree(path, ignore_errors=True)
        wanted = {path.name for stage, key in keep.items() for path in self._paths(stage, key)}
        for path in self.folder.glob("*-*.json"):
            if path.name not in wanted and path.stem.rsplit("-", 1)[0] in keep:
                path.unlink(missing_ok=True)
                path.with_suffix(".npz").unlink(missing_ok=True)
