"""Stages with a cache: compute what is missing, load what is finished, in dependency order.

Each `Stage` names the stages it reads and the parameters its result depends on. Keys
chain: a stage's key covers its parameters and the keys of the stages it reads, so a
changed parameter reruns exactly the stages downstream of it. Results are loaded from the
cache only when something still to be computed needs them; a damaged entry is computed
again, after a one-line notice. A stage that `keeps_work` finds, under `inputs[WORK]`, a
folder for partial work that outlives an interruption.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Callable, Protocol

from strataweave.errors import DamagedFileError
from strataweave.workflow.cache import StageCache, stage_key


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
