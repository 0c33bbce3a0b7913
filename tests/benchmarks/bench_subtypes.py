"""Benchmark of the subtype-count sweep: wall time per backend, speed-up, Dask overhead.

Usage: python tests/benchmarks/bench_subtypes.py [--patients 500] [--features 1000]
       [--modalities 3] [--counts 2-8] [--resamples 50] [--restarts 3] [--max-iter 100]
       [--runs processes:1,processes:2,dask:2] [--warm-start]

Invented data: planted groups in non-negative modalities of fictional features. The issue's
targets: N = 500, 3 x 1,000 features, counts 2..8, 50 resamples on 2 cores, local processes
1 vs 2 workers, then a Dask LocalCluster with 2 workers (overhead against local processes
<= 1.3x); then N = 2,000. Timings are wall-clock and depend on other load on the machine.
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
import pandas as pd

from strataweave.graph import fuse_modalities
from strataweave.subtypes import ParallelSettings, SweepSettings, planned_tasks, sweep_subtype_counts

PLANTED = 4
MARKERS_PER_GROUP = 40


def invented_modalities(n_patients: int, n_features: int, n_modalities: int, seed: int) -> dict[str, pd.DataFrame]:
    """Gamma noise plus a marker shift per planted group: non-negative, fictional feature names."""
    rng = np.random.default_rng(seed)
    groups = rng.integers(0, PLANTED, n_patients)
    patients = pd.Index([f"BNC-{i:05d}" for i in range(n_patients)], name="patient_id")
    views = {}
    for m in range(n_modalities):
        shift = np.zeros((PLANTED, n_features))
        for g in range(PLANTED):
            shift[g, rng.choice(n_features, MARKERS_PER_GROUP, replace=False)] = 1.5
        values = rng.gamma(2.0, 1.0, size=(n_patients, n_features)) + shift[groups]
        views[f"layer{m}"] = pd.DataFrame(values, index=patients, columns=[f"QZB{m}{j:04d}" for j in range(n_features)])
    return views


def parse_counts(text: str) -> list[int]:
    low, _, high = text.partition("-")
    return list(range(int(low), int(high or low) + 1))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--patients", type=int, default=500)
    parser.add_argument("--features", type=int, default=1000)
    parser.add_argument("--modalities", type=int, default=3)
    parser.add_argument("--counts", default="2-8")
    parser.add_argument("--resamples", type=int, default=50)
    parser.add_argument("--restarts", type=int, default=3)
    parser.add_argument("--max-iter", type=int, default=100)
    parser.add_argument("--runs", default="processes:1,processes:2,dask:2")
    parser.add_argument("--warm-start", action="store_true")
    args = parser.parse_args()

    views = invented_modalities(args.patients, args.features, args.modalities, seed=7)
    started = time.perf_counter()
    graph = fuse_modalities({name: np.log1p(frame) for name, frame in views.items()}, rule="average")
    print(f"graph: {time.perf_counter() - started:.1f} s")
    counts = parse_counts(args.counts)
    settings = SweepSettings(n_resamples=args.resamples, resample_restarts=args.restarts, warm_start=args.warm_start)
    factorization = {"max_iter": args.max_iter, "inner_updates": 2, "tol": 1e-4}
    print(
        f"N={args.patients}, {args.modalities} x {args.features} features, counts {counts[0]}..{counts[-1]}, "
        f"{args.resamples} resamples x {args.restarts} restarts, warm start {args.warm_start}: "
        f"{planned_tasks(counts, settings)} tasks"
    )
    timings, labels = {}, {}
    for run in args.runs.split(","):
        backend, _, jobs = run.partition(":")
        parallel = ParallelSettings(backend=backend, n_jobs=int(jobs or 1))
        started = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result = sweep_subtype_counts(
                views, graph, counts, settings=settings, factorization=factorization, parallel=parallel, random_state=3
            )
        timings[run] = time.perf_counter() - started
        labels[run] = result.resample_labels
        print(f"{run:>14}: {timings[run]:8.1f} s  (recommended {result.count}, unconverged fits {result.unconverged})")
    first = next(iter(labels))
    for run, other in labels.items():
        differing = {k: int((labels[first][k] != other[k]).any(axis=1).sum()) for k in counts}
        print(f"{run:>14}: resamples whose labels differ from {first}, per count: {differing}")
    if "processes:1" in timings and "processes:2" in timings:
        print(f"speed-up 2 workers over 1: {timings['processes:1'] / timings['processes:2']:.2f}x")
    if "dask:2" in timings and "processes:2" in timings:
        print(f"Dask LocalCluster (2 workers) / local processes (2): {timings['dask:2'] / timings['processes:2']:.2f}x")


if __name__ == "__main__":
    main()
