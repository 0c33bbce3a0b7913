"""The stage cache in `<run>/stages/` and the pipeline that runs the stages against it.

A result is stored under a key: the sha256 of the stage name, its parameters and the
keys of the stages it reads, so changing one parameter changes the keys of exactly the
stages that depend on it. Each finished result is one JSON + one `.npz`: the `.npz` is
written first and the JSON last, each atomically, so a result counts as finished only once
its JSON exists; the JSON carries the sha256 of both, so an entry damaged later is told
apart from a good one. Arrays are read back with `allow_pickle=False`; nothing is ever
unpickled.

Sections: the codec (stage results to JSON plus arrays and back), keys and stored
entries, the pipeline (compute what is missing, load what is finished), and the finished
resamples of an unfinished sweep.
"""

from __future__ import annotations

import hashlib
import json
import shutil
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Protocol

import numpy as np
import pandas as pd
import scipy.sparse as sp

from strataweave.errors import DamagedFileError
from strataweave.files import read_checked, write_checked
from strataweave.subtypes.tasks import ResampleFit, fit_resample

# ---------------------------------------------------------------------------------------------
# The codec: lossless conversion of nested stage results to JSON plus named numpy arrays (no pickle).
#
# A stage result is any nesting of dicts, lists, tuples, scalars, strings, None, numpy
# arrays, scipy sparse matrices and pandas Index / Series / DataFrame objects. `encode`
# splits it into a JSON-ready tree and a dict of arrays for an `.npz` file; `decode`
# rebuilds an equal object (same dtypes, same labels) so that tables written from a cached
# result are byte for byte those written from a fresh one. Object arrays are never stored:
# text becomes fixed-width unicode with a missing-value mask.
# ---------------------------------------------------------------------------------------------

class _Encoder:
    def __init__(self) -> None:
        self.arrays: dict[str, np.ndarray] = {}

    def array(self, values: np.ndarray) -> dict:
        name = f"a{len(self.arrays)}"
        if values.dtype == object:
            return self.text_array(values)
        self.arrays[name] = np.ascontiguousarray(values)
        return {"$array": name}

    def text_array(self, values: np.ndarray) -> dict:
        """Object array of str / None / NaN / bool as unicode (or bool) plus a missing mask."""
        flat = values.ravel()
        missing = pd.isna(flat)
        present = flat[~missing]
        if all(isinstance(v, (bool, np.bool_)) for v in present):
            filled = np.where(missing, False, flat).astype(bool)
        elif all(isinstance(v, str) for v in present):
            filled = np.where(missing, "", flat).astype(str)
        else:
            raise TypeError(f"cannot store an object array holding {type(present[0]).__name__} values")
        name = f"a{len(self.arrays)}"
        self.arrays[name] = filled.reshape(values.shape)
        mask_name = f"a{len(self.arrays)}"
        self.arrays[mask_name] = missing.reshape(values.shape)
        return {"$objects": name, "missing": mask_name}

    def index(self, index: pd.Index) -> dict:
        return {"$index": self.array(index.to_numpy()), "name": self.value(index.name)}

    def frame(self, frame: pd.DataFrame) -> dict:
        columns = self.index(frame.columns)
        index = self.index(frame.index)
        dtypes = frame.dtypes.unique()
        if frame.shape[1] > 0 and len(dtypes) == 1 and isinstance(dtypes[0], np.dtype) and dtypes[0] != object:
            return {"$frame": "block", "index": index, "columns": columns, "values": self.array(frame.to_numpy())}
        return {
            "$frame": "columns",
            "index": index,
            "columns": columns,
            "values": [self.column(frame.iloc[:, i]) for i in range(frame.shape[1])],
        }

    def column(self, series: pd.Series) -> dict:
        if isinstance(series.dtype, pd.CategoricalDtype):
            return {
                "$category": self.array(series.cat.codes.to_numpy()),
                "categories": self.index(series.cat.categories),
                "ordered": bool(series.cat.ordered),
            }
        if not isinstance(series.dtype, np.dtype):
            raise TypeError(f"cannot store a column of dtype {series.dtype}")
        return self.array(series.to_numpy())

    def value(self, obj: object) -> object:
        if obj is None or isinstance(obj, (bool, str)):
            return obj
        if isinstance(obj, (int, np.integer)) and not isinstance(obj, np.bool_):
            return int(obj)
        if isinstance(obj, np.bool_):
            return bool(obj)
        if isinstance(obj, (float, np.floating)):
            return {"$float": repr(float(obj))} if not np.isfinite(obj) else float(obj)
        if isinstance(obj, Path):
            return str(obj)
        if isinstance(obj, np.ndarray):
            return self.array(obj)
        if sp.issparse(obj):
            csr = sp.csr_matrix(obj)
            return {
                "$sparse": [self.array(csr.data), self.array(csr.indices), self.array(csr.indptr)],
                "shape": list(csr.shape),
            }
        if isinstance(obj, pd.DataFrame):
            return self.frame(obj)
        if isinstance(obj, pd.Series):
            return {"$series": self.column(obj), "index": self.index(obj.index), "name": self.value(obj.name)}
        if isinstance(obj, pd.Index):
            return self.index(obj)
        if isinstance(obj, dict):
            if all(isinstance(k, str) and not k.startswith("$") for k in obj):
                return {k: self.value(v) for k, v in obj.items()}
            return {"$pairs": [[self.value(k), self.value(v)] for k, v in obj.items()]}
        if isinstance(obj, tuple):
            return {"$tuple": [self.value(v) for v in obj]}
        if isinstance(obj, list):
            return [self.value(v) for v in obj]
        raise TypeError(f"cannot store a {type(obj).__name__} in the stage cache")


def encode(obj: object) -> tuple[object, dict[str, np.ndarray]]:
    """Split `obj` into a JSON-ready tree and the arrays it refers to."""
    encoder = _Encoder()
    tree = encoder.value(obj)
    return tree, encoder.arrays


def _array(ref: dict, arrays) -> np.ndarray:
    if "$objects" in ref:
        values = arrays[ref["$objects"]].astype(object)
        values[arrays[ref["missing"]]] = None
        return values
    return arrays[ref["$array"]]


def _index(ref: dict, arrays) -> pd.Index:
    return pd.Index(_array(ref["$index"], arrays), name=decode(ref["name"], arrays))


def _column(ref: dict, arrays) -> object:
    if "$category" in ref:
        categories = _index(ref["categories"], arrays)
        dtype = pd.CategoricalDtype(categories, ordered=ref["ordered"])
        return pd.Categorical.from_codes(_array(ref["$category"], arrays), dtype=dtype)
    return _array(ref, arrays)


def _frame(tree: dict, arrays) -> pd.DataFrame:
    index = _index(tree["index"], arrays)
    columns = _index(tree["columns"], arrays)
    if tree["$frame"] == "block":
        return pd.DataFrame(_array(tree["values"], arrays), index=index, columns=columns)
    data = {i: _column(ref, arrays) for i, ref in enumerate(tree["values"])}
    frame = pd.DataFrame(data, index=index)
    frame.columns = columns
    return frame


def decode(tree: object, arrays) -> object:
    """Rebuild the object that `encode` split into `tree` and `arrays`."""
    if isinstance(tree, list):
        return [decode(v, arrays) for v in tree]
    if not isinstance(tree, dict):
        return tree
    if "$float" in tree:
        return float(tree["$float"])
    if "$array" in tree or "$objects" in tree:
        return _array(tree, arrays)
    if "$sparse" in tree:
        data, indices, indptr = (_array(ref, arrays) for ref in tree["$sparse"])
        return sp.csr_matrix((data, indices, indptr), shape=tuple(tree["shape"]))
    if "$frame" in tree:
        return _frame(tree, arrays)
    if "$series" in tree:
        return pd.Series(
            _column(tree["$series"], arrays), index=_index(tree["index"], arrays), name=decode(tree["name"], arrays)
        )
    if "$index" in tree:
        return _index(tree, arrays)
    if "$pairs" in tree:
        return {decode(k, arrays): decode(v, arrays) for k, v in tree["$pairs"]}
    if "$tuple" in tree:
        return tuple(decode(v, arrays) for v in tree["$tuple"])
    return {k: decode(v, arrays) for k, v in tree.items()}


# ---------------------------------------------------------------------------------------------
# Keys and stored entries
# ---------------------------------------------------------------------------------------------

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
    """One step of a run: `compute(inputs)` gets the results of `needs` by name."""

    name: str
    needs: tuple[str, ...]
    parameters: dict
    compute: Callable[[dict[str, object]], object]
    keeps_work: bool = False


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
            return self.cache.load(name, key)
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
