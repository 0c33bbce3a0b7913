"""The stage cache in `<run>/stages/`: one JSON + one `.npz` per finished stage result.

A result is stored under a key: the sha256 of the stage name, its parameters and the
keys of the stages it reads, so changing one parameter changes the keys of exactly the
stages that depend on it. The `.npz` is written first and the JSON last, each atomically,
so a result counts as finished only once its JSON exists. Arrays are read back with
`allow_pickle=False`; nothing is ever unpickled.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import numpy as np

from strataweave.files import atomic_write_arrays, atomic_write_text
from strataweave.workflow.codec import decode, encode

CACHE_FORMAT = 1


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

    def has(self, stage: str, key: str) -> bool:
        json_path, _ = self._paths(stage, key)
        if not json_path.is_file():
            return False
        try:
            return json.loads(json_path.read_text(encoding="utf-8")).get("key") == key
        except (OSError, ValueError):
            return False

    def save(self, stage: str, key: str, result: object) -> None:
        """Store a stage result under its key: the JSON tree last, so a half-written entry never counts."""
        tree, arrays = encode(result)
        json_path, npz_path = self._paths(stage, key)
        atomic_write_arrays(npz_path, arrays)
        record = {"stage": stage, "key": key, "result": tree}
        atomic_write_text(json_path, json.dumps(record, allow_nan=True))

    def load(self, stage: str, key: str) -> object:
        """The stage result stored under `key` (pandas, sparse and numpy objects rebuilt without pickle)."""
        json_path, npz_path = self._paths(stage, key)
        record = json.loads(json_path.read_text(encoding="utf-8"))
        with np.load(npz_path, allow_pickle=False) as archive:
            arrays = {name: archive[name] for name in archive.files}
        return decode(record["result"], arrays)

    def prune(self, keep: dict[str, str]) -> None:
        """Delete cached results whose key is not the current key of their stage."""
        wanted = {path.name for stage, key in keep.items() for path in self._paths(stage, key)}
        for path in self.folder.glob("*-*.json"):
            if path.name not in wanted and path.stem.rsplit("-", 1)[0] in keep:
                path.unlink(missing_ok=True)
                path.with_suffix(".npz").unlink(missing_ok=True)
