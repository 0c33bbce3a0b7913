"""Run independent tasks through joblib: serial, local processes, or Dask distributed.

Every task runs with BLAS and OpenMP limited to one thread (threadpoolctl), whatever the
backend: worker processes then do not oversubscribe the cores, and floating-point sums (BLAS
products, scikit-learn's k-means) happen in the same order everywhere, so a task given the
same seed returns the same result on every backend. The limit is set in this process for
the whole run as well: serial tasks and the threads of an in-process Dask cluster then share
one setting instead of racing to set and restore it.

Every task also checks that its process runs the same versions of strataweave and of the
numeric libraries as the main process: a remote worker with another install would silently
compute other numbers for the same seed.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Callable, Iterator, Sequence
from contextlib import ExitStack, contextmanager
from dataclasses import dataclass, field
from functools import cache
from typing import Any, Protocol

import joblib
import numpy as np
import scipy
import scipy.linalg  # noqa: F401  (loads scipy's BLAS now, so the thread limit reaches it too)
import sklearn
from threadpoolctl import threadpool_info, threadpool_limits

from strataweave import __version__
from strataweave.errors import InputError

BACKENDS = ("serial", "processes", "dask")


def available_cores() -> int:
    """The cores this process may run on (its CPU affinity where the system tells it)."""
    if hasattr(os, "sched_getaffinity"):
        return len(os.sched_getaffinity(0))
    return os.cpu_count() or 1


class TaskCheckpoint(Protocol):
    """Keeps the results of finished tasks outside the batch, so a batch run again skips them."""

    def finished(self, function: Callable, task_params: Sequence[Any]) -> dict[int, Any]:
        """Results already kept for `function`, by position in `task_params`."""

    def keep(self, function: Callable, params: Any, result: Any) -> None:
        """Keep the result of one finished task."""


@dataclass(frozen=True)
class ParallelSettings:
    """Where the tasks run.

    backend: "serial" (this process), "processes" (``n_jobs`` local processes) or "dask".
    scheduler: for "dask", the address of a running scheduler; ``None`` starts a LocalCluster
    with ``n_jobs`` single-threaded workers for the run and stops it afterwards.
    connect_timeout: seconds to wait for the scheduler before giving up with an InputError.
    local_cluster_processes: whether that LocalCluster's workers are processes (else threads).
    checkpoint: where finished tasks are kept as they finish, so an interrupted batch resumes.
    """

    backend: str = "serial"
    n_jobs: int = 1
    scheduler: str | None = None
    connect_timeout: float = 10.0
    local_cluster_processes: bool = True
    checkpoint: TaskCheckpoint | None = field(default=None, compare=False, repr=False)

    def __post_init__(self) -> None:
        if self.backend not in BACKENDS:
            raise InputError(f"backend: found {self.backend!r}; expected one of {', '.join(BACKENDS)}")
        if not isinstance(self.n_jobs, int) or self.n_jobs < 1:
            raise InputError(f"n_jobs: found {self.n_jobs!r}; expected a whole number >= 1")
        if self.connect_timeout <= 0:
            raise InputError(f"connect_timeout: found {self.connect_timeout}; expected seconds > 0")


@cache
def software_versions() -> str:
    """The versions of strataweave and of the numeric libraries (and BLAS kernels) this process runs."""
    blas = sorted(f"{pool['internal_api']} {pool['version']} {pool.get('architecture')}"
                  for pool in threadpool_info() if pool["user_api"] == "blas")
    return " ".join([f"strataweave {__version__}", f"numpy {np.__version__}", f"scipy {scipy.__version__}",
                     f"scikit-learn {sklearn.__version__}", *blas])


def _single_threaded(function: Callable, shared: Any, params: Any, main_versions: str) -> tuple[Any, list]:
    """One task on one BLAS thread: its result and the warnings it raised (message, category, file, line)."""
    if software_versions() != main_versions:
        raise InputError(
            f"workers: found a worker running {software_versions()}, the main process {main_versions}; "
            "expected the same versions everywhere (install the same versions on the workers)"
        )
    with threadpool_limits(limits=1), warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = function(shared, params)
    return result, [(str(w.message), w.category, w.filename, w.lineno) for w in caught]


@contextmanager
def _dask_client(settings: ParallelSettings) -> Iterator[Any]:
    """A Dask client for the run: connected to `settings.scheduler`, or to a fresh LocalCluster."""
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise InputError(
            "backend: found 'dask' but the distributed package is not installed; "
            "expected strataweave installed with its 'distributed' extra"
        ) from None
    if settings.scheduler is None:
        cluster = LocalCluster(
            n_workers=settings.n_jobs,
            threads_per_worker=1,
            processes=settings.local_cluster_processes,
            dashboard_address=None,
        )
        client = Client(cluster)
    else:
        cluster = None
        try:
            client = Client(settings.scheduler, timeout=settings.connect_timeout)
        except (OSError, TimeoutError) as error:
            raise InputError(
                f"scheduler: found no Dask scheduler answering at {settings.scheduler!r} within "
                f"{settings.connect_timeout:g} s ({error}); expected the address of a running scheduler"
            ) from None
        try:
            client.wait_for_workers(1, timeout=settings.connect_timeout)
        except (OSError, TimeoutError):
            client.close()
            raise InputError(
                f"scheduler: found no worker attached to the Dask scheduler at {settings.scheduler!r} within "
                f"{settings.connect_timeout:g} s; expected at least one worker"
            ) from None
    try:
        yield client
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


class TaskRunner:
    """Runs batches of tasks on one backend; a Dask cluster lives as long as the runner.

    Use as a context manager so that several batches (e.g. full-data fits, then resamples)
    share one cluster.
    """

    def __init__(self, settings: ParallelSettings = ParallelSettings()):
        self.settings = settings
        self._stack: ExitStack | None = None

    def __enter__(self) -> "TaskRunner":
        self._stack = ExitStack()
        self._stack.enter_context(threadpool_limits(limits=1))
        if self.settings.backend == "dask":
            self._stack.enter_context(_dask_client(self.settings))
        return self

    def __exit__(self, *exc_info) -> None:
        self._stack.close()
        self._stack = None

    def map(
        self,
        function: Callable[[Any, Any], Any],
        shared: Any,
        task_params: Sequence[Any],
        progress: Callable[[int], None] | None = None,
        done_before: int = 0,
    ) -> list[Any]:
        """``[function(shared, p) for p in task_params]`` on the backend, in order.

        `function` must be importable at module level (it travels to other processes).
        `shared` holds the large inputs, sent once per worker where the backend allows
        (memory-mapped for local processes, scattered for Dask). `progress`, if given, is
        called with ``done_before`` plus the number of finished tasks after each one. Tasks
        the settings' checkpoint already holds are not run again.
        """
        if self._stack is None:
            raise RuntimeError("TaskRunner.map called outside its 'with' block")
        checkpoint = self.settings.checkpoint
        done = checkpoint.finished(function, task_params) if checkpoint is not None else {}
        todo = [(position, params) for position, params in enumerate(task_params) if position not in done]
        calls = (
            joblib.delayed(_single_threaded)(function, shared, params, software_versions()) for _, params in todo
        )
        keep = None if checkpoint is None else (lambda params, result: checkpoint.keep(function, params, result))
        if not todo:  # joblib warns when a generator it was given ends before any task
            return _collect(len(task_params), done, iter(()), keep, progress, done_before)
        if self.settings.backend == "dask":
            with joblib.parallel_config(backend="dask", scatter=[shared]):
                fresh = joblib.Parallel(return_as="generator")(calls)
                return _collect(len(task_params), done, zip(todo, fresh), keep, progress, done_before)
        n_jobs = 1 if self.settings.backend == "serial" else self.settings.n_jobs
        backend = "sequential" if n_jobs == 1 else "loky"
        parallel = joblib.Parallel(n_jobs=n_jobs, backend=backend, return_as="generator")
        return _collect(len(task_params), done, zip(todo, parallel(calls)), keep, progress, done_before)


def run_tasks(
    function: Callable[[Any, Any], Any],
    shared: Any,
    task_params: Sequence[Any],
    settings: ParallelSettings = ParallelSettings(),
    progress: Callable[[int], None] | None = None,
) -> list[Any]:
    """One batch of tasks on a runner of its own (see :meth:`TaskRunner.map`)."""
    with TaskRunner(settings) as runner:
        return runner.map(function, shared, task_params, progress)


def _collect(
    n_tasks: int,
    done: dict[int, Any],
    fresh: Iterator[tuple[tuple[int, Any], Any]],
    keep: Callable[[Any, Any], None] | None,
    progress: Callable[[int], None] | None,
    done_before: int,
) -> list[Any]:
    """Results in task order: those `done` before, then each fresh one (kept as it arrives).

    A fresh task's warnings, recorded where it ran, are raised again here, so that they reach
    the caller's warning filters whichever process the task ran in.
    """
    collected = dict(done)
    if progress is not None and collected:
        progress(done_before + len(collected))
    for (position, params), (result, raised) in fresh:
        for message, category, filename, lineno in raised:
            warnings.warn_explicit(message, category, filename, lineno)
        if keep is not None:
            keep(params, result)
        collected[position] = result
        if progress is not None:
            progress(done_before + len(collected))
    return [collected[position] for position in range(n_tasks)]
