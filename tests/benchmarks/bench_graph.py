"""Benchmark of the graph layer: per-modality graphs and their `intersection` fusion.

Usage: python tests/benchmarks/bench_graph.py [--sizes 2000 5000 20000] [--features 2000]
       [--modalities 3] [--neighbours 20]

Each size runs in a fresh process, so its peak resident memory is its own. In that process
the invented cohort is drawn and all modalities are graphed and fused with `intersection`
(columns: total; mean per-modality graph pass; the fusing pass, i.e. kernels of every
modality on all candidate pairs, fusion and the k-strongest cut). Then one modality's graph
alone (`one graph`) and scikit-learn's NearestNeighbors(algorithm="brute").kneighbors_graph
are timed alternately on the same matrix (best of two runs up to N = 5,000, one above). Targets: peak memory under 3 GB at N = 20,000 (never an N x N
array) and per-modality graph time at most 1.5 x scikit-learn's. Timings on a shared
machine are noisy.
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time

import numpy as np
import pandas as pd

MEMORY_TARGET_GB = 3.0
RATIO_TARGET = 1.5


def invented_cohort(n_patients: int, n_features: int, n_modalities: int) -> dict[str, pd.DataFrame]:
    """Random modalities over fictional patients; the last one misses every 20th patient."""
    rng = np.random.default_rng(20261201)
    ids = pd.Index([f"BB{i:06d}" for i in range(n_patients)])
    data = {}
    for m in range(n_modalities):
        keep = np.ones(n_patients, dtype=bool)
        if m == n_modalities - 1:
            keep[::20] = False
        columns = [f"layer{m}_feat{j}" for j in range(n_features)]
        data[f"layer{m}"] = pd.DataFrame(rng.standard_normal((keep.sum(), n_features)), index=ids[keep], columns=columns)
    return data


def _seconds(task) -> float:
    start = time.perf_counter()
    task()
    return time.perf_counter() - start


def measure(n_patients: int, n_features: int, n_modalities: int, n_neighbours: int) -> dict:
    """One size, in this process: fusion time and peak memory, then one modality against scikit-learn."""
    from sklearn.neighbors import NearestNeighbors

    from strataweave.graph import fuse_modalities

    data = invented_cohort(n_patients, n_features, n_modalities)
    data_gb = sum(frame.memory_usage(index=False).sum() for frame in data.values()) / 1e9
    stamps = [time.perf_counter()]
    graph = fuse_modalities(data, rule="intersection", n_neighbours=n_neighbours,
                            progress=lambda done: stamps.append(time.perf_counter()))
    total = time.perf_counter() - stamps[0]
    peak_gb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024 / 1e9
    passes = np.diff(stamps)

    # the same matrix, ours and scikit-learn's alternately; the best of `repeats` runs each
    single = {"layer0": data["layer0"]}
    matrix = data["layer0"].to_numpy()
    repeats = 2 if n_patients <= 5000 else 1
    ours, reference = [], []
    for _ in range(repeats):
        ours.append(_seconds(lambda: fuse_modalities(single, n_neighbours=n_neighbours)))
        reference.append(_seconds(lambda: NearestNeighbors(n_neighbors=n_neighbours, algorithm="brute")
                                  .fit(matrix).kneighbors_graph(mode="distance")))
    return {
        "patients": n_patients, "fusion_s": total, "graph_pass_s": float(passes[:n_modalities].mean()),
        "fuse_pass_s": float(passes[n_modalities:].sum() + total - passes.sum()),
        "single_s": min(ours), "sklearn_s": min(reference), "ratio": min(ours) / min(reference),
        "peak_gb": peak_gb, "data_gb": data_gb, "dense_nxn_gb": n_patients**2 * 8 / 1e9,
        "edges": int(graph.affinity.nnz // 2), "isolated": int(len(graph.isolated_patients)),
        "fallback": int(len(graph.fallback_patients)),
    }


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[2000, 5000, 20000])
    parser.add_argument("--features", type=int, default=2000)
    parser.add_argument("--modalities", type=int, default=3)
    parser.add_argument("--neighbours", type=int, default=20)
    parser.add_argument("--one", type=int, help=argparse.SUPPRESS)  # internal: measure one size, print JSON
    args = parser.parse_args(argv)
    if args.one:
        print(json.dumps(measure(args.one, args.features, args.modalities, args.neighbours)))
        return 0
    header = (f"{'N':>7} {'fusion s':>9} {'graphs s':>9} {'fuse s':>7} {'one graph s':>11} {'sklearn s':>9} "
              f"{'ratio':>6} {'peak GB':>8} {'data GB':>8} {'NxN GB':>7} {'edges':>9} {'isolated':>8} "
              f"{'fallback':>8}  verdict")
    print(f"{args.modalities} modalities x {args.features} features, k = {args.neighbours}, intersection", flush=True)
    print(header, flush=True)
    failed = False
    for size in args.sizes:
        command = [sys.executable, __file__, "--one", str(size), "--features", str(args.features),
                   "--modalities", str(args.modalities), "--neighbours", str(args.neighbours)]
        row = json.loads(subprocess.run(command, check=True, capture_output=True, text=True).stdout)
        ok = row["ratio"] <= RATIO_TARGET and row["peak_gb"] < MEMORY_TARGET_GB
        failed |= not ok
        print(f"{row['patients']:>7} {row['fusion_s']:>9.1f} {row['graph_pass_s']:>9.1f} {row['fuse_pass_s']:>7.1f} "
              f"{row['single_s']:>11.1f} {row['sklearn_s']:>9.1f} {row['ratio']:>6.2f} {row['peak_gb']:>8.2f} "
              f"{row['data_gb']:>8.2f} {row['dense_nxn_gb']:>7.2f} {row['edges']:>9} {row['isolated']:>8} "
              f"{row['fallback']:>8}  {'ok' if ok else 'MISSED'}", flush=True)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
