"""The stage cache in `<run>/stages/` and the pipeline that runs the stages against it.

A result is stored under a key: the sha256 of the stage name, its parameters and the
keys of the stages it reads, so changing one parameter changes the keys of exactly the
stages that depend on it. Each finished result is one JSON + one `.npz`: the `.npz` is
written first and the JSON last, each atomically, so a result counts as finished only once
its JSON exists; the JSON carries the sha256 of both, so an entry damaged later is told
apart from a good one. Arrays are read back with `allow_pickle=False`; nothing is ever
unpickled. A typed result (`Stateful`: `to_state` / `from_state`) stores its own state;
any other result goes through the codec of `strataweave.codec`.

Sections: keys and stored entries, the pipeline (compute what is missing, load what is
finished), and the finished resamples of an unfinished sweep.
"""

from __future__ import annotations

import hashlib
import json
import shutil
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Protocol, runtime_checkable

import numpy as np

from strataweave.codec import decode, encode
from strataweave.errors import DamagedFileError, InputError
from strataweave.files import read_checked, write_checked
from strataweave.subtypes.tasks import ResampleFit, fit_resample

# ---------------------------------------------------------------------------------------------
# Keys and stored entries
# ---------------------------------------------------------------------------------------------

CACHE_FORMAT = 3


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


@runtime_checkable
class Stateful(Protocol):
    """A typed stage result: a JSON-ready state plus named arrays, and the class method that rebuilds it."""

    def to_state(self) -> tuple[dict, dict[str, np.ndarray]]: ...

    @classmethod
    def from_state(cls, state: dict, arrays) -> "Stateful": ...


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
        field, (tree, arrays) = ("state", result.to_state()) if isinstance(result, Stateful) else ("result", encode(result))
        json_path, npz_path = self._paths(stage, key)
        write_checked(json_path, npz_path, {"stage": stage, "key": key, field: tree}, arrays)
        shutil.rmtree(self.work_folder(stage, key), ignore_errors=True)

    def load(self, stage: str, key: str, result_type: type[Stateful] | None = None) -> object:
        """The stage result stored under `key` (rebuilt by `result_type.from_state` when given, else decoded);
        DamagedFileError if the entry does not read back as written (or holds the other kind of result)."""
        json_path, npz_path = self._paths(stage, key)
        record, arrays = read_checked(json_path, npz_path)
        field = "result" if result_type is None else "state"
        if record.get("key") != key or field not in record:
            raise DamagedFileError(json_path, f"holds no {field} for key {key[:16]}")
        try:
            if result_type is not None:
                return result_type.from_state(record["state"], arrays)
            return decode(record["result"], arrays)
        except (KeyError, TypeError, ValueError, AttributeError, InputError) as error:
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


# ---------------------------------------------------------------------------------------------
# The pipeline: stages with a cache, computing what is missing, loading what is finished, in
# dependency order.
#
# Each `Stage` names the stages it reads and the parameters its result depends on. Keys
# chain: a stage's key covers its parameters and the keys of the stages it reads, so a
# changed parameter reruns exactly the stages downstream of it. Results are loaded from the
# cache only when something still to be computed needs them; a damaged entry is computed
# again, after a one-line notice. A stage that `keeps_work` finds, under `inputs[WORK]`, a
# folder for partial work that outlives an interruption.
# ---------------------------------------------------------------------------------------------

_MISSING = object()
WORK = "work_folder"


@dataclass(frozen=True)
class Stage:
    """One step of a run: `compute(inputs)` gets the results of `needs` by name; a typed result
    names its class in `result_type`, so the cache rebuilds it with `from_state`."""

    name: str
    needs: tuple[str, ...]
    parameters: dict
    compute: Callable[[dict[str, object]], object]
    keeps_work: bool = False
    result_type: type[Stateful] | None = None


class StageListener(Protocol):
    def stage_started(self, name: str, cached: bool) -> None: ...

    def stage_finished(self, name: str, key: str, seconds: float, cached: bool) -> None: ...

    def notice(self, message: str) -> None: ...


class Pipeline:
    """Runs a list of stages (each listed after the stages it needs) against a cache."""

    def __init__(self, stages: list[Stage], cache: StageCache, listener: StageListener) -> None:
        self.stages = {stage.name: stage for stage in stages}
        self.cache = cache
        self.listener = listener
        self.keys = self._chain_keys(stages)
        self._results: dict[str, object] = {}

    @staticmethod
    def _chain_keys(stages: list[Stage]) -> dict[str, str]:
        keys: dict[str, str] = {}
        for stage in stages:
            missing = [need for need in stage.needs if need not in keys]
            if missing:
                raise ValueError(f"stage {stage.name!r} is listed before the stages it needs: {missing}")
            keys[stage.name] = stage_key(stage.name, stage.parameters, {n: keys[n] for n in stage.needs})
        return keys

    def result(self, name: str) -> object:
        """The result of stage `name`: from memory, from the cache, or computed now."""
        if name in self._results:
            return self._results[name]
        stage, key = self.stages[name], self.keys[name]
        start = time.perf_counter()
        value = self._cached(name, key)
        cached = value is not _MISSING
        if not cached:
            inputs = {need: self.result(need) for need in stage.needs}
            if stage.keeps_work:
                inputs[WORK] = self.cache.work_folder(name, key)
            self.listener.stage_started(name, cached=False)
            start = time.perf_counter()
            value = stage.compute(inputs)
            self.cache.save(name, key, value)
        self.listener.stage_finished(name, key, time.perf_counter() - start, cached)
        self._results[name] = value
        return value

    def _cached(self, name: str, key: str) -> object:
        """The cached result of stage `name`, or _MISSING when there is none or it is damaged (with a notice)."""
        if not self.cache.has(name, key):
            return _MISSING
        self.listener.stage_started(name, cached=True)
        try:
            return self.cache.load(name, key, self.stages[name].result_type)
        except DamagedFileError as damage:
            self.listener.notice(f"{damage.path}: {damage.reason}; computing stage {name!r} again")
            return _MISSING


# ---------------------------------------------------------------------------------------------
# The finished resample tasks of an unfinished sweep, kept in the stage cache's work folder.
#
# Each resample task that finishes is written at once (a checked JSON + `.npz` pair named by
# its position and seed), so a sweep interrupted after hours resumes with the resamples left.
# A resumed sweep reads back exactly the labels it would have computed, so its results are
# byte for byte those of an uninterrupted one. The full-data fits, one per count, are cheap
# beside the resamples and are computed again.
# ---------------------------------------------------------------------------------------------

class ResampleCheckpoint:
    """Finished `fit_resample` tasks in `folder`; other tasks pass through unkept."""

    def __init__(self, folder: Path, notice: Callable[[str], None]) -> None:
        self.folder, self.notice = Path(folder), notice

    def _paths(self, task: tuple[int, int]) -> tuple[Path, Path]:
        stem = self.folder / f"resample-{task[0]}-{task[1]}"
        return stem.with_suffix(".json"), stem.with_suffix(".npz")

    def finished(self, function: Callable, task_params: Sequence[tuple[int, int]]) -> dict[int, ResampleFit]:
        """The resamples already kept, by position; a damaged one is left to run again, with a notice."""
        if function is not fit_resample:
            return {}
        kept = {}
        for position, task in enumerate(task_params):
            json_path, npz_path = self._paths(task)
            if not json_path.is_file():
                continue
            try:
                record, arrays = read_checked(json_path, npz_path)
                kept[position] = ResampleFit(arrays["labels"], int(record["unconverged"]))
            except DamagedFileError as damage:
                self.notice(f"{damage.path}: {damage.reason}; running that resample again")
            except (KeyError, TypeError, ValueError) as damage:
                self.notice(f"{json_path}: lacks or garbles {damage}; running that resample again")
        if kept:
            self.notice(f"sweep: {len(kept)} of {len(task_params)} resamples already finished, resuming after them")
        return kept

    def keep(self, function: Callable, params: tuple[int, int], result: ResampleFit) -> None:
        if function is fit_resample:
            json_path, npz_path = self._paths(params)
            write_checked(json_path, npz_path, {"unconverged": int(result.unconverged)}, {"labels": result.labels})
