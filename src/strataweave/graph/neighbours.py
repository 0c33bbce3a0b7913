"""Each patient's k nearest neighbours within one modality: exact (brute force, in blocks) or approximate.

Exact: each block of distance scores comes from one matrix product (threaded by BLAS); picking
the k smallest per row is split over threads too, as numpy releases the GIL while partitioning.
Approximate: a nearest-neighbour-descent graph (the optional package pynndescent), worth it only
for large cohorts, where the exact search's N^2 products dominate a run.
"""

from __future__ import annotations

import importlib.util
import os
import warnings
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from strataweave.errors import InputError
from strataweave.graph.checks import check_choice
from strataweave.graph.metrics import (
    RowSpace, block_rows, block_scores, distances_from_scores, left_norms, paired_distances, row_scores,
)

SELECTION_THREADS = max(1, min(4, os.cpu_count() or 1))

#: How neighbours are searched: `auto` picks approximate above APPROXIMATE_ABOVE patients when
#: pynndescent is installed, exact otherwise.
SEARCHES = ("auto", "exact", "approximate")

# `auto` searches approximately in a modality with more patients than this. Measured with
# tests/benchmarks/bench_neighbours.py on the 2-core development machine (shared, so noisy):
# 3 modalities x 2,000 features, k = 20, all three searches (exact / approximate, seconds):
# 2.6 / 48 at 2,000 patients, 12 / 68 at 5,000, 53 / 78 at 10,000, 107 / 56 at 15,000 (119 / 140
# in a busier run), 202 / 81 at 20,000, 1471 / 180 at 50,000 (recall 0.997-1.000). One search once
# compiled costs 15 / 5 s at 10,000 and 60 / 9 s at 20,000, but the first approximate search of a
# process also compiles pynndescent's kernels (32-55 s, 115 s when busier), which only pays off
# from about 12,000 patients with 3 modalities, so the threshold sits a little above that.
APPROXIMATE_ABOVE = 15_000

INSTALL_HINT = "pip install 'strataweave[scale]' (or pip install pynndescent)"


def approximate_available() -> bool:
    """Whether pynndescent can be imported (checked without importing it)."""
    return importlib.util.find_spec("pynndescent") is not None


def check_search(search: str) -> None:
    """InputError for an unknown search, or for `approximate` without pynndescent installed."""
    check_choice("neighbour_search", search, SEARCHES)
    if search == "approximate" and not approximate_available():
        raise InputError(f"neighbour_search: found 'approximate' but pynndescent is not installed; "
                         f"expected it installed: {INSTALL_HINT}")


def chosen_search(search: str, n_rows: int) -> str:
    """`exact` or `approximate` for a modality of n_rows patients under the requested search.

    `auto` above the threshold without pynndescent searches exactly and warns that it could be faster.
    """
    check_search(search)
    if search != "auto":
        return search
    if n_rows <= APPROXIMATE_ABOVE:
        return "exact"
    if approximate_available():
        return "approximate"
    warnings.warn(f"neighbour_search 'auto': {n_rows} patients (more than {APPROXIMATE_ABOVE}) searched exactly, "
                  f"as pynndescent is not installed; for the faster approximate search: {INSTALL_HINT}", stacklevel=2)
    return "exact"


def find_neighbours(space: RowSpace, n_neighbours: int, search: str = "exact",
                    seed: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(indices, distances), each n x k, nearest first, by the `exact` or `approximate` search."""
    if search == "approximate":
        return approximate_neighbours(space, n_neighbours, seed)
    return nearest_neighbours(space, n_neighbours)


def nearest_neighbours(space: RowSpace, n_neighbours: int) -> tuple[np.ndarray, np.ndarray]:
    """(indices, distances), each n x k, nearest first; a patient is never its own neighbour."""
    n = space.n_rows
    indices = np.empty((n, n_neighbours), dtype=np.int64)
    distances = np.empty((n, n_neighbours), dtype=np.float64)

    def select(block: np.ndarray, start: int, stop: int, offset: int) -> None:
        indices[start:stop], distances[start:stop] = _nearest_of(
            space, block[start - offset:stop - offset], np.arange(start, stop), n_neighbours)

    step = block_rows(n, n)
    with ThreadPoolExecutor(SELECTION_THREADS) as pool:
        for start in range(0, n, step):
            stop = min(start + step, n)
            block = block_scores(space, start, stop)
            cuts = np.linspace(start, stop, SELECTION_THREADS + 1).astype(int)
            list(pool.map(select, [block] * SELECTION_THREADS, cuts[:-1], cuts[1:], [start] * SELECTION_THREADS))
    return indices, distances


def approximate_neighbours(space: RowSpace, n_neighbours: int, seed: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(indices, distances) like `nearest_neighbours`, from a nearest-neighbour-descent graph.

    The descent runs on the prepared rows under Euclidean distance, which orders unit-length
    rows (cosine) and centred unit-length rows (correlation) as their own metric does; the
    distances of the pairs found are then computed like the exact search's (float64). `seed`
    fixes the descent's random choices. Rows the descent leaves short are searched exactly.
    """
    from pynndescent import NNDescent

    n, k = space.n_rows, n_neighbours
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message="Failed to correctly find n_neighbors")  # repaired below
        found = NNDescent(space.rows, metric="euclidean", n_neighbors=k + 1, random_state=seed).neighbor_graph[0]
    own = found == np.arange(n)[:, None]
    drop = own | (~own.any(axis=1, keepdims=True) & (np.arange(k + 1) == k))  # without itself: drop the farthest
    indices = found[~drop].reshape(n, k).astype(np.int64)
    short = np.flatnonzero((indices < 0).any(axis=1))
    indices[short] = 0
    distances = paired_distances(space, np.repeat(np.arange(n), k), indices.ravel()).reshape(n, k)
    step = block_rows(len(short), n)
    for start in range(0, len(short), step):
        rows = short[start:start + step]
        indices[rows], distances[rows] = _nearest_of(space, row_scores(space, rows), rows, k)
    return _nearest_first(indices, distances)


def _nearest_of(space: RowSpace, scores: np.ndarray, rows: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """The k nearest of each of `rows` from its scores to every row (changed in place), self excluded."""
    scores[np.arange(len(rows)), rows] = np.inf
    nearest = np.argpartition(scores, k - 1, axis=1)[:, :k]
    nearest_scores = np.take_along_axis(scores, nearest, axis=1)
    return _nearest_first(nearest, distances_from_scores(space, nearest_scores, left_norms(space, rows)))


def _nearest_first(indices: np.ndarray, distances: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each row sorted by distance, ties by index, so both searches order neighbours alike."""
    order = np.lexsort((indices, distances), axis=1)
    return np.take_along_axis(indices, order, axis=1), np.take_along_axis(distances, order, axis=1)
