"""Each patient's k nearest neighbours within one modality (brute force, in blocks).

Each block of distance scores comes from one matrix product (threaded by BLAS); picking the
k smallest per row is split over threads too, as numpy releases the GIL while partitioning.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from strataweave.graph.metrics import RowSpace, block_rows, block_scores, distances_from_scores, left_norms

SELECTION_THREADS = max(1, min(4, os.cpu_count() or 1))


def nearest_neighbours(space: RowSpace, n_neighbours: int) -> tuple[np.ndarray, np.ndarray]:
    """(indices, distances), each n x k, nearest first; a patient is never its own neighbour."""
    n = space.n_rows
    indices = np.empty((n, n_neighbours), dtype=np.int64)
    distances = np.empty((n, n_neighbours), dtype=np.float64)

    def select(block: np.ndarray, start: int, stop: int, offset: int) -> None:
        part = block[start - offset:stop - offset]
        part[np.arange(stop - start), np.arange(start, stop)] = np.inf
        nearest = np.argpartition(part, n_neighbours - 1, axis=1)[:, :n_neighbours]
        nearest_scores = np.take_along_axis(part, nearest, axis=1)
        nearest_dist = distances_from_scores(space, nearest_scores, left_norms(space, slice(start, stop)))
        order = np.lexsort((nearest, nearest_dist), axis=1)
        indices[start:stop] = np.take_along_axis(nearest, order, axis=1)
        distances[start:stop] = np.take_along_axis(nearest_dist, order, axis=1)

    step = block_rows(n, n)
    with ThreadPoolExecutor(SELECTION_THREADS) as pool:
        for start in range(0, n, step):
            stop = min(start + step, n)
            block = block_scores(space, start, stop)
            cuts = np.linspace(start, stop, SELECTION_THREADS + 1).astype(int)
            list(pool.map(select, [block] * SELECTION_THREADS, cuts[:-1], cuts[1:], [start] * SELECTION_THREADS))
    return indices, distances
