"""The parallel runner: same results on every backend, progress, and a clear error for a dead scheduler."""

import os
import subprocess
import sys
import time
import warnings

import numpy as np
import pytest
from threadpoolctl import threadpool_info

import strataweave
from strataweave import InputError
from strataweave.seeding import child_seeds
from strataweave.subtypes import parallel
from strataweave.subtypes.parallel import ParallelSettings, run_tasks


def warning_task(shared, seed):
    warnings.warn(f"task {seed} warns", RuntimeWarning)
    return seed


def seeded_projection_labels(shared, seed):
    """A small seeded labelling task, with the BLAS and OpenMP thread limits seen inside the worker
    (a second thread splits k-means and BLAS sums differently, which changes the last bits)."""
    rng = np.random.default_rng(seed)
    data = shared["data"]
    rows = rng.choice(data.shape[0], size=40, replace=False)
    labels = np.argmax(data[rows] @ rng.normal(size=(data.shape[1], 3)), axis=1)
    threads = [pool["num_threads"] for pool in threadpool_info() if pool["user_api"] in ("blas", "openmp")]
    return rows, labels, threads


@pytest.fixture(scope="module")
def shared():
    return {"data": np.random.default_rng(0).normal(size=(60, 5))}


@pytest.mark.slow
def test_results_are_identical_on_serial_processes_and_dask(shared):
    seeds = child_seeds(11, 6)
    ticks = []
    serial = run_tasks(seeded_projection_labels, shared, seeds, ParallelSettings("serial"), progress=ticks.append)
    assert ticks == [1, 2, 3, 4, 5, 6]
    local = run_tasks(seeded_projection_labels, shared, seeds, ParallelSettings("processes", n_jobs=2))
    dask = run_tasks(
        seeded_projection_labels,
        shared,
        seeds,
        ParallelSettings("dask", n_jobs=2, local_cluster_processes=False),
    )
    for a, b, c in zip(serial, local, dask, strict=True):
        np.testing.assert_array_equal(a[0], b[0])
        np.testing.assert_array_equal(a[1], b[1])
        np.testing.assert_array_equal(a[1], c[1])
        assert all(threads == 1 for threads in a[2] + b[2] + c[2])


def test_unreachable_scheduler_is_an_input_error_within_the_timeout(shared):
    started = time.monotonic()
    settings = ParallelSettings("dask", scheduler="tcp://127.0.0.1:9", connect_timeout=1.0)
    with pytest.raises(InputError, match="no Dask scheduler answering at 'tcp://127.0.0.1:9'"):
        run_tasks(seeded_projection_labels, shared, [1], settings)
    assert time.monotonic() - started < 10


@pytest.mark.parametrize(
    "kwargs, message", [({"backend": "gpu"}, "backend"), ({"n_jobs": 0}, "n_jobs"), ({"connect_timeout": 0}, "connect")]
)
def test_bad_settings_are_input_errors(kwargs, message):
    with pytest.raises(InputError, match=message):
        ParallelSettings(**kwargs)


def test_scheduler_without_workers_is_an_input_error_within_the_timeout(shared):
    from distributed import LocalCluster

    with LocalCluster(n_workers=0, processes=False, dashboard_address=None) as empty:
        settings = ParallelSettings("dask", scheduler=empty.scheduler_address, connect_timeout=1.0)
        started = time.monotonic()
        with pytest.raises(InputError, match="no worker attached"):
            run_tasks(seeded_projection_labels, shared, [1], settings)
        assert time.monotonic() - started < 10


def test_worker_running_other_versions_than_the_main_process_is_refused(shared, monkeypatch):
    # A remote worker with another install computes other numbers for the same seed; here the
    # main process pretends to run other versions than its workers.
    monkeypatch.setattr(parallel, "software_versions", lambda: "strataweave 0.0.0")
    with pytest.raises(InputError, match="workers: found a worker running strataweave .*, the main process strataweave 0.0.0"):
        run_tasks(seeded_projection_labels, shared, child_seeds(3, 2), ParallelSettings("processes", n_jobs=2))


@pytest.mark.slow
def test_software_versions_are_the_same_in_every_fresh_process():
    # Two independent interpreters of the same install must agree, or every worker would be
    # refused: nothing process-specific (paths, times, thread counts) goes in.
    script = "from strataweave.subtypes.parallel import software_versions; print(software_versions())"
    single_threaded = {**os.environ, "OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1"}
    command = [sys.executable, "-c", script]
    other = subprocess.run(command, capture_output=True, text=True, check=True, env=single_threaded)
    assert other.stdout.strip() == parallel.software_versions()
    assert parallel.software_versions().startswith(f"strataweave {strataweave.__version__} numpy ")


class _KeptInMemory:
    """A checkpoint holding finished tasks in a dict, as a resumed batch would find them."""

    def __init__(self):
        self.kept = {}

    def finished(self, function, task_params):
        return {i: self.kept[seed] for i, seed in enumerate(task_params) if seed in self.kept}

    def keep(self, function, seed, result):
        self.kept[seed] = result


def test_tasks_a_checkpoint_holds_are_not_run_again_and_results_keep_their_order(shared):
    seeds = child_seeds(5, 5)
    checkpoint = _KeptInMemory()
    whole = run_tasks(seeded_projection_labels, shared, seeds, ParallelSettings("serial"))
    run_tasks(seeded_projection_labels, shared, seeds[1:4:2], ParallelSettings("serial", checkpoint=checkpoint))
    assert set(checkpoint.kept) == {seeds[1], seeds[3]}
    ran, ticks = [], []

    def counting(shared, seed):
        ran.append(seed)
        return seeded_projection_labels(shared, seed)

    resumed = run_tasks(counting, shared, seeds, ParallelSettings("serial", checkpoint=checkpoint), ticks.append)
    assert ran == [seeds[0], seeds[2], seeds[4]] and ticks == [2, 3, 4, 5]
    for (rows, labels, _), (rows_whole, labels_whole, _) in zip(resumed, whole):
        assert np.array_equal(rows, rows_whole) and np.array_equal(labels, labels_whole)
    assert set(checkpoint.kept) == set(seeds)


@pytest.mark.parametrize("backend", ["serial", "processes"])
def test_warnings_raised_in_a_task_reach_the_callers_filters_whatever_process_ran_it(shared, backend):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        results = run_tasks(warning_task, shared, [3, 4, 5], ParallelSettings(backend, n_jobs=2))
    assert results == [3, 4, 5]
    assert sorted(str(w.message) for w in caught if issubclass(w.category, RuntimeWarning)) == [
        "task 3 warns", "task 4 warns", "task 5 warns"]
