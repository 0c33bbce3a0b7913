"""Benchmark of the neighbour searches: exact against approximate, time, recall and peak memory.

Usage: python tests/benchmarks/bench_neighbours.py [--sizes 2000 10000] [--features 2000]
       [--modalities 3] [--neighbours 20]        (add 50000 to --sizes for the scale target)

For each size, two fresh processes (so each peak resident memory is its own) draw the same
invented cohort and fuse all its modalities with `intersection`, one with
neighbour_search = "exact", one with "approximate" (seed fixed). Each modality's search is
timed as fuse_modalities calls it: `first` is the first modality's (for approximate it
includes importing pynndescent and compiling its kernels, paid once per process), `later` the
mean of the others. Recall is the share of the exact k nearest that the approximate search
found, over all patients of all modalities. The cohort has structure, as omics layers do: six
groups on a 10-dimensional latent space, projected to every feature, plus noise. Target: peak
memory under 24 GiB at N = 50,000 with the approximate search. Timings on a shared machine are noisy.
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

MEMORY_TARGET_GB = 24 * 2**30 / 1e9
RECALL_TARGET = 0.9


def structured_cohort(n_patients: int, n_features: int, n_modalities: int) -> dict[str, pd.DataFrame]:
    """Invented modalities over fictional patients sharing six groups; the last misses every 20th patient."""
    rng = np.random.default_rng(20261203)
    ids = pd.Index([f"BN{i:06d}" for i in range(n_patients)])
    groups = rng.integers(0, 6, n_patients)
    data = {}
    for m in range(n_modalities):
        keep = np.ones(n_patients, dtype=bool)
        if m == n_modalities - 1:
            keep[::20] = False
        latent = rng.normal(scale=2.0, size=(6, 10))[groups[keep]] + rng.standard_normal((keep.sum(), 10))
        values = latent @ rng.standard_normal((10, n_features)) / np.sqrt(10)
        values += rng.standard_normal(values.shape)
        columns = [f"layer{m}_feat{j}" for j in range(n_features)]
        data[f"layer{m}"] = pd.DataFrame(values, index=ids[keep], columns=columns)
    return data


def measure(n_patients: int, n_features: int, n_modalities: int, n_neighbours: int, search: str, keep: Path) -> dict:
    """One size and search, in this process: per-modality search times, fusion time, peak memory.

    The neighbour lists each search returns are saved in `keep` for the recall.
    """
    from strataweave.graph import fusion

    data = structured_cohort(n_patients, n_features, n_modalities)
    searched, seconds = [], []
    search_as_fusion_does = fusion.find_neighbours

    def timed_search(*args, **kwargs):
        start = time.perf_counter()
        found = search_as_fusion_does(*args, **kwargs)
        seconds.append(time.perf_counter() - start)
        searched.append(found[0])
        return found

    fusion.find_neighbours = timed_search  # times each modality's search where the fusion makes it
    start = time.perf_counter()
    graph = fusion.fuse_modalities(data, rule="intersection", n_neighbours=n_neighbours, neighbour_search=search,
                                   random_state=7)
    total = time.perf_counter() - start
    peak_gb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024 / 1e9
    for number, indices in enumerate(searched):
        np.save(keep / f"{search}{number}.npy", indices)
    return {
        "patients": n_patients, "search": search, "used": sorted(set(graph.parameters["neighbour_search"].values())),
        "first_s": seconds[0], "later_s": float(np.mean(seconds[1:])) if len(seconds) > 1 else float("nan"),
        "fusion_s": total, "peak_gb": peak_gb,
    }


def recall(keep: Path, n_modalities: int) -> float:
    """Share of the exact neighbours the approximate search found, over every patient of every modality."""
    found = total = 0
    for number in range(n_modalities):
        exact, approximate = np.load(keep / f"exact{number}.npy"), np.load(keep / f"approximate{number}.npy")
        found += int((approximate[:, :, None] == exact[:, None, :]).any(axis=2).sum())
        total += exact.size
    return found / total


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[2000, 10000])
    parser.add_argument("--features", type=int, default=2000)
    parser.add_argument("--modalities", type=int, default=3)
    parser.add_argument("--neighbours", type=int, default=20)
    parser.add_argument("--one", type=int, help=argparse.SUPPRESS)  # internal: measure one size, print JSON
    parser.add_argument("--search", help=argparse.SUPPRESS)
    parser.add_argument("--keep", type=Path, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.one:
        print(json.dumps(measure(args.one, args.features, args.modalities, args.neighbours, args.search, args.keep)))
        return 0
    print(f"{args.modalities} modalities x {args.features} features, k = {args.neighbours}, intersection", flush=True)
    print(f"{'N':>7} {'search':>11} {'first s':>8} {'later s':>8} {'fusion s':>9} {'peak GB':>8} {'recall':>7}  verdict",
          flush=True)
    failed = False
    for size in args.sizes:
        with tempfile.TemporaryDirectory() as keep:
            rows = []
            for search in ("exact", "approximate"):
                command = [sys.executable, __file__, "--one", str(size), "--features", str(args.features),
                           "--modalities", str(args.modalities), "--neighbours", str(args.neighbours),
                           "--search", search, "--keep", keep]
                rows.append(json.loads(subprocess.run(command, check=True, capture_output=True, text=True).stdout))
            found = recall(Path(keep), args.modalities)
        for row in rows:
            approximate = row["search"] == "approximate"
            ok = row["peak_gb"] < MEMORY_TARGET_GB and (not approximate or found >= RECALL_TARGET)
            failed |= not ok
            print(f"{row['patients']:>7} {row['search']:>11} {row['first_s']:>8.1f} {row['later_s']:>8.1f} "
                  f"{row['fusion_s']:>9.1f} {row['peak_gb']:>8.2f} {found if approximate else 1.0:>7.3f}  "
                  f"{'ok' if ok else 'MISSED'}", flush=True)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
