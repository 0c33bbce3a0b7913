"""Distances and neighbour lists against scikit-learn and scipy (reference libraries)."""

import numpy as np
import pytest
from scipy.spatial.distance import cdist
from sklearn.neighbors import NearestNeighbors

from strataweave.graph import metrics
from strataweave.graph.metrics import block_scores, distances_from_scores, left_norms, paired_distances, prepare_rows
from strataweave.graph.neighbours import nearest_neighbours

METRICS = ["euclidean", "correlation", "cosine"]


@pytest.fixture
def matrix():
    return np.random.default_rng(3).normal(size=(120, 15))


@pytest.mark.parametrize("metric", METRICS)
def test_block_distances_equal_scipy_cdist(matrix, metric):
    space = prepare_rows(matrix, metric)
    distances = distances_from_scores(space, block_scores(space, 10, 30), left_norms(space, slice(10, 30)))
    # scipy.spatial.distance.cdist uses the same metric names and definitions; the Euclidean
    # distance of a row to itself via dot products is only zero to about 1e-7
    np.testing.assert_allclose(distances, cdist(matrix[10:30], matrix, metric), atol=1e-6)


@pytest.mark.parametrize("metric", METRICS)
def test_paired_distances_equal_scipy_cdist(matrix, metric):
    rng = np.random.default_rng(4)
    left, right = rng.integers(0, len(matrix), 300), rng.integers(0, len(matrix), 300)
    expected = cdist(matrix, matrix, metric)[left, right]
    np.testing.assert_allclose(paired_distances(prepare_rows(matrix, metric), left, right), expected, atol=1e-9)


@pytest.mark.parametrize("metric", METRICS)
def test_neighbour_sets_equal_scikit_learn(matrix, metric, monkeypatch):
    # small blocks so that several blocks (and the self-exclusion offset) are exercised
    monkeypatch.setattr(metrics, "BLOCK_ELEMENTS", 7 * len(matrix))
    indices, distances = nearest_neighbours(prepare_rows(matrix, metric), 8)
    # scikit-learn NearestNeighbors, brute force, same metric; kneighbors() without X skips self
    reference = NearestNeighbors(n_neighbors=8, algorithm="brute", metric=metric).fit(matrix)
    ref_dist, ref_ind = reference.kneighbors()
    np.testing.assert_array_equal(np.sort(indices, axis=1), np.sort(ref_ind, axis=1))
    np.testing.assert_allclose(distances, ref_dist, atol=1e-9)
    assert (indices != np.arange(len(matrix))[:, None]).all()


def test_duplicate_patients_are_neighbours_not_themselves():
    matrix = np.vstack([np.eye(4), np.eye(4)[:1]])  # row 4 duplicates row 0
    indices, distances = nearest_neighbours(prepare_rows(matrix, "euclidean"), 1)
    assert indices[0, 0] == 4 and indices[4, 0] == 0
    assert distances[0, 0] == 0.0
