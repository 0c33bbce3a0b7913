"""Forked processes that draw the report's figures and slides side by side.

Forked, not spawned: each worker starts with the loaded run folder and the plotting stack
already in memory (a spawned one would spend about a second importing matplotlib before its
first figure). Where the system cannot fork, or one core is all there is, everything is drawn
in this process, with the same files as the result.
"""

from __future__ import annotations

import multiprocessing
from collections.abc import Callable, Iterator
from concurrent.futures import Executor, ProcessPoolExecutor
from contextlib import contextmanager

from strataweave.report.run_folder import RunView
from strataweave.subtypes.parallel import available_cores

_RUN: RunView | None = None  # the run a worker draws from, set once as it starts


def _adopt(run: RunView) -> None:
    global _RUN
    _RUN = run


def on_run(function: Callable, *args):
    """`function(run, *args)` in a worker, on the run the pool was made for."""
    return function(_RUN, *args)


@contextmanager
def drawing_pool(run: RunView, pieces: int) -> Iterator[Executor | None]:
    """A pool of at most one worker per core and per piece of work, or None to draw here."""
    workers = min(available_cores(), pieces)
    if workers < 2 or "fork" not in multiprocessing.get_all_start_methods():
        yield None
        return
    context = multiprocessing.get_context("fork")
    with ProcessPoolExecutor(workers, mp_context=context, initializer=_adopt, initargs=(run,)) as pool:
        yield pool
