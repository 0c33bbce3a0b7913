"""Each stage of the sweep's path as the cohort grows: time against its reference, peak memory, growth exponent.

Usage: python tests/benchmarks/bench_scale.py [--sizes 400 2000 10000 [50000]] [--features 500]
       [--modalities 3] [--counts 2-8] [--resamples 20] [--jobs 2]

Invented cohort (bench_subtypes.invented_modalities: gamma noise, 4 planted groups). Every
(stage, size) runs in a fresh process, so its peak resident memory (its own and its
workers') is its own. Stages, all on defaults, and their references:
  graph      fuse_modalities on the log1p modalities / scikit-learn kneighbors_graph of each
             modality (exact, brute force) with the same neighbour count, summed
  factorize  one JointNMF outer iteration with the graph / the 2-GEMM floor (X H^T and W^T X on
             the concatenated data, each in its faster form, the model's dtype), and / one
             scikit-learn NMF(solver="mu") iteration on the same data
  sweep      sweep_subtype_counts, --jobs local processes / the same work done by hand with
             scikit-learn: one NMF(solver="mu", its defaults) fit per count and per resample,
             timed once per count on all patients and multiplied, divided by --jobs
The growth exponent of a column is the slope of log(value) against log(N) over the sizes.
Timings on a shared machine are noisy; the ratios within one size are measured back to back.
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time
import warnings
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

RANK = 6  # components of the factorize stage
SHORT, LONG = 10, 50  # per-iteration cost = (time of a LONG-iteration fit - a SHORT one) / (LONG - SHORT)


def _cohort(n_patients: int, args):
    from bench_subtypes import invented_modalities

    views = invented_modalities(n_patients, args.features, args.modalities, seed=11)
    return views, {name: np.log1p(frame) for name, frame in views.items()}


def _timed(call) -> float:
    start = time.perf_counter()
    call()
    return time.perf_counter() - start


def stage_graph(n_patients: int, args) -> dict:
    from sklearn.neighbors import NearestNeighbors

    from strataweave.graph import fuse_modalities

    _, logged = _cohort(n_patients, args)
    ours = _timed(lambda: fuse_modalities(logged, random_state=0))
    reference = sum(
        _timed(lambda f=frame: NearestNeighbors(n_neighbors=20, algorithm="brute").fit(f.to_numpy()).kneighbors_graph())
        for frame in logged.values()
    )
    return {"seconds": ours, "reference": reference}


def stage_factorize(n_patients: int, args) -> dict:
    from bench_factorize import fastest, gemm_floor, quiet_fit
    from sklearn.decomposition import NMF
    from threadpoolctl import threadpool_limits

    from strataweave.factorize import JointNMF
    from strataweave.graph import fuse_modalities

    views, logged = _cohort(n_patients, args)
    arrays = [frame.to_numpy() for frame in views.values()]
    graph = fuse_modalities(logged, random_state=0).affinity

    def ours(iterations):
        model = JointNMF(RANK, max_iter=iterations, tol=0, random_state=0)
        return fastest(lambda: quiet_fit(model, arrays, graph), 3)

    def theirs(iterations):
        model = NMF(RANK, solver="mu", max_iter=iterations, tol=0, random_state=0)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return fastest(lambda: model.fit(X64), 3)

    X64 = np.hstack(arrays)
    with threadpool_limits(1, user_api="blas"):  # as in the sweep's workers
        per_iteration = (ours(LONG) - ours(SHORT)) / (LONG - SHORT)
        model = quiet_fit(JointNMF(RANK, max_iter=1, random_state=0), arrays, graph)
        dtype = model.components_[0].dtype
        floor = gemm_floor(X64.astype(dtype), model.patient_factor_, np.hstack(model.components_), 2)
        sklearn_mu = (theirs(LONG) - theirs(SHORT)) / (LONG - SHORT)
    return {"seconds": per_iteration, "reference": floor, "sklearn_mu": sklearn_mu}


def stage_sweep(n_patients: int, args) -> dict:
    from bench_subtypes import parse_counts
    from sklearn.decomposition import NMF

    from strataweave.graph import fuse_modalities
    from strataweave.subtypes import ParallelSettings, SweepSettings, sweep_subtype_counts

    views, logged = _cohort(n_patients, args)
    graph = fuse_modalities(logged, random_state=0)
    counts = parse_counts(args.counts)
    settings = SweepSettings(n_resamples=args.resamples)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ours = _timed(lambda: sweep_subtype_counts(
            views, graph, counts, settings=settings, parallel=ParallelSettings(backend="processes", n_jobs=args.jobs),
            random_state=3,
        ))
        X = np.hstack([frame.to_numpy() for frame in views.values()])
        by_hand = sum(_timed(lambda k=k: NMF(k, solver="mu", random_state=0).fit(X)) for k in counts)
    return {"seconds": ours, "reference": by_hand * (1 + args.resamples) / args.jobs}


STAGES = {"graph": stage_graph, "factorize": stage_factorize, "sweep": stage_sweep}
REFERENCES = {"graph": "kneighbors_graph", "factorize": "2-GEMM floor", "sweep": "scikit-learn NMF by hand"}


def _peak_gb() -> float:
    own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    workers = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    return max(own, workers) / 2**20  # ru_maxrss is in KiB on Linux


def _run_one(stage: str, n_patients: int, argv: list[str]) -> dict:
    command = [sys.executable, __file__, "--one", stage, str(n_patients), *argv]
    finished = subprocess.run(command, capture_output=True, text=True)
    if finished.returncode != 0:
        raise SystemExit(f"{stage} at N={n_patients} failed:\n{finished.stderr[-2000:]}")
    return json.loads(finished.stdout.strip().splitlines()[-1])


def _exponent(sizes: list[int], values: list[float]) -> float:
    if len(sizes) < 2:
        return float("nan")
    return float(np.polyfit(np.log(sizes), np.log(values), 1)[0])


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--sizes", type=int, nargs="+", default=[400, 2000, 10000])
    parser.add_argument("--features", type=int, default=500, help="features per modality")
    parser.add_argument("--modalities", type=int, default=3)
    parser.add_argument("--counts", default="2-8")
    parser.add_argument("--resamples", type=int, default=20)
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--stages", nargs="+", default=list(STAGES), choices=list(STAGES))
    parser.add_argument("--one", nargs=2, metavar=("STAGE", "N"), help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.one:
        stage, n_patients = args.one
        row = STAGES[stage](int(n_patients), args)
        print(json.dumps({**row, "peak_gb": _peak_gb()}))
        return 0

    passed = [f"--{name}={getattr(args, name)}" for name in ("features", "modalities", "counts", "resamples", "jobs")]
    print(f"{args.modalities} modalities x {args.features} features, counts {args.counts}, "
          f"{args.resamples} resamples, {args.jobs} processes")
    print(f"{'stage':<10}{'N':>8}{'seconds':>11}  {'reference':<26}{'seconds':>9}{'ratio':>8}{'peak GB':>9}  notes")
    for stage in args.stages:
        seconds, peaks = [], []
        for n in args.sizes:
            row = _run_one(stage, n, passed)
            seconds.append(row["seconds"])
            peaks.append(row["peak_gb"])
            note = f"scikit-learn mu iteration {row['sklearn_mu']:.3g} s" if "sklearn_mu" in row else ""
            print(f"{stage:<10}{n:>8}{row['seconds']:>11.3g}  {REFERENCES[stage]:<26}{row['reference']:>9.3g}"
                  f"{row['seconds'] / row['reference']:>8.2f}{row['peak_gb']:>9.2f}  {note}", flush=True)
        print(f"{stage:<10}{'growth exponent':>19}: time {_exponent(args.sizes, seconds):.2f}, "
              f"peak memory {_exponent(args.sizes, peaks):.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
