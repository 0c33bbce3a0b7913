"""Each patient's k nearest neighbours within one modality (brute force, in blocks)."""

from __future__ import annotations

import numpy as np

from strataweave.graph.metrics import RowSpace, block_rows, block_scores, distances_from_scores, left_norms


def nearest_neighbours(space: RowSpace, n_neighbours: int) -> tuple[np.ndarray, np.ndarray]:
    """(indices, distances), each n x k, nearest first; a patient is never its own neighbour."""
    n = space.n_rows
    indices = np.empty((n, n_neighbours), dtype=np.int64)
    distances = np.empty((n, n_neighbours), dtype=np.float64)
    step = block_rows(n, n)
    for start in range(0, n, step):
        stop = min(start + step, n)
        block = block_scores(space, start, stop)
        local = np.arange(stop - start)
        block[local, local + start] = np.inf
        nearest = np.argpartition(block, n_neighbours - 1, axis=1)[:, :n_neighbours]
        nearest_scores = np.take_along_axis(block, nearest, axis=1)
        nearest_dist = distances_from_scores(space, nearest_scores, left_norms(space, slice(start, stop)))
        order = np.lexsort((nearest, nearest_dist), axis=1)
        indices[start:stop] = np.take_along_axis(nearest, order, axis=1)
        distances[start:stop] = np.take_along_axis(nearest_dist, order, axis=1)
    return indices, distances
