"""Benchmark of the consensus summary: time and peak memory as the cohort grows, blocked vs dense.

Usage: python tests/benchmarks/bench_consensus.py [--sizes 2000,5000,10000,20000] [--resamples 50] [--count 6]

Invented resample labels (a planted grouping, 80 % of patients drawn per resample, 10 % of the
drawn ones relabelled at random). For each N, in one run: the blocked summary the sweep uses
(PAC, consensus with each subtype, the kept matrix) against the dense N x N computation it
replaced (consensus matrix, then the same quantities from it; skipped above 10,000 patients),
peak memory of numpy's allocations (tracemalloc), and the growth exponent of time and memory
over the sizes (slope of log value against log N; the issue's target: memory linear in N
above the kept side of 5,000 patients).
"""

from __future__ import annotations

import argparse
import time
import tracemalloc

import numpy as np

from strataweave.subtypes.consensus import consensus_matrix, kept_patients, summarise_consensus

DENSE_LIMIT = 10_000


def invented_labels(n_patients: int, n_resamples: int, count: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, count, n_patients)
    noisy = np.where(rng.random((n_resamples, n_patients)) < 0.9, truth, rng.integers(0, count, (n_resamples, n_patients)))
    return np.where(rng.random((n_resamples, n_patients)) < 0.8, noisy, -1), truth


def measured(task) -> tuple[float, float]:
    """(seconds, peak MB of numpy allocations) of one call."""
    tracemalloc.start()
    started = time.perf_counter()
    task()
    seconds = time.perf_counter() - started
    peak = tracemalloc.get_traced_memory()[1] / 2**20
    tracemalloc.stop()
    return seconds, peak


def dense(labels: np.ndarray, truth: np.ndarray) -> None:
    """The computation the blocks replaced: the whole matrix, then PAC and the subtype means."""
    matrix = consensus_matrix(labels)
    upper = matrix[np.triu_indices_from(matrix, k=1)]
    np.mean((upper > 0.1) & (upper <= 0.9))
    defined = np.isfinite(matrix)
    np.fill_diagonal(defined, False)
    members = np.eye(truth.max() + 1, dtype=np.float32)[truth]
    np.where(defined, matrix, 0.0).astype(np.float32) @ members


def slope(sizes: list[int], values: list[float]) -> float:
    return float(np.polyfit(np.log(sizes), np.log(values), 1)[0])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--sizes", default="2000,5000,10000,20000")
    parser.add_argument("--resamples", type=int, default=50)
    parser.add_argument("--count", type=int, default=6)
    args = parser.parse_args()
    sizes = [int(s) for s in args.sizes.split(",")]
    print(f"{'N':>7} {'blocked s':>10} {'blocked MB':>11} {'dense s':>8} {'dense MB':>9} {'MB ratio':>9}")
    times, peaks = [], []
    for n in sizes:
        labels, truth = invented_labels(n, args.resamples, args.count, seed=n)
        seconds, peak = measured(lambda: summarise_consensus(labels, truth, (0.1, 0.9), kept_patients(n, 1)))
        times.append(seconds)
        peaks.append(peak)
        if n <= DENSE_LIMIT:
            dense_seconds, dense_peak = measured(lambda: dense(labels, truth))
            print(f"{n:>7} {seconds:>10.2f} {peak:>11.0f} {dense_seconds:>8.2f} {dense_peak:>9.0f} {peak / dense_peak:>9.2f}")
        else:
            print(f"{n:>7} {seconds:>10.2f} {peak:>11.0f} {'-':>8} {'-':>9} {'-':>9}")
    large = [i for i, n in enumerate(sizes) if n > 5_000]
    print(f"growth exponent over all sizes: time {slope(sizes, times):.2f}, memory {slope(sizes, peaks):.2f}")
    if len(large) >= 2:
        picked = [sizes[i] for i in large]
        print(f"memory growth exponent above the kept side: {slope(picked, [peaks[i] for i in large]):.2f}")


if __name__ == "__main__":
    main()
