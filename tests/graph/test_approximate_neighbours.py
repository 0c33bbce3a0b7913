"""The approximate neighbour search against exact kNN, the `auto` rule, and reproducibility."""

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import cdist
from sklearn.neighbors import NearestNeighbors

import strataweave as sw
from strataweave import InputError
from strataweave.graph import fuse_modalities, neighbours
from strataweave.graph.metrics import prepare_rows
from strataweave.graph.neighbours import APPROXIMATE_ABOVE, approximate_neighbours, chosen_search, nearest_neighbours

pytest.importorskip("pynndescent")

METRICS = ["euclidean", "correlation", "cosine"]
RECALL_BOUND = 0.9  # share of the exact k nearest that the approximate search must find


def invented_profiles(n_rows: int, n_features: int, seed: int) -> np.ndarray:
    """Invented patients in six groups on a 10-dimensional latent space, plus noise on every feature."""
    rng = np.random.default_rng(seed)
    latent = rng.normal(scale=2.0, size=(6, 10))[rng.integers(0, 6, n_rows)] + rng.normal(size=(n_rows, 10))
    return latent @ rng.normal(size=(10, n_features)) + rng.normal(size=(n_rows, n_features)) + 5.0


@pytest.fixture(scope="module")
def profiles():
    return invented_profiles(3000, 40, 11)


@pytest.mark.slow  # the first approximate search of a process compiles pynndescent's kernels (about 30 s)
@pytest.mark.parametrize("metric", METRICS)
def test_recall_against_scikit_learn_exact_neighbours(profiles, metric):
    k = 15
    indices, distances = approximate_neighbours(prepare_rows(profiles, metric), k, seed=5)
    # scikit-learn NearestNeighbors, brute force, same metric, is the exact reference;
    # kneighbors() without X leaves each row out of its own list
    reference = NearestNeighbors(n_neighbors=k, algorithm="brute", metric=metric).fit(profiles)
    _, exact = reference.kneighbors()
    recall = (indices[:, :, None] == exact[:, None, :]).any(axis=2).mean()
    assert recall >= RECALL_BOUND, f"{metric}: recall {recall:.3f}"
    rows = np.arange(len(profiles))
    assert (indices != rows[:, None]).all()
    assert (np.diff(distances, axis=1) >= 0).all()  # nearest first
    assert all(len(set(row)) == k for row in indices[:50])
    # the distances of the pairs found are exact (scipy cdist, same metric names and definitions)
    pairs = cdist(profiles[:40], profiles, metric)[rows[:40, None], indices[:40]]
    np.testing.assert_allclose(distances[:40], pairs, atol=1e-9)


@pytest.mark.slow
def test_same_seed_same_neighbours_and_same_graph(profiles):
    space = prepare_rows(profiles, "euclidean")
    first, again = approximate_neighbours(space, 10, seed=3), approximate_neighbours(space, 10, seed=3)
    np.testing.assert_array_equal(first[0], again[0])
    np.testing.assert_array_equal(first[1], again[1])
    ids = pd.Index([f"P{i}" for i in range(600)])
    data = {"a": pd.DataFrame(profiles[:600], index=ids), "b": pd.DataFrame(profiles[600:1200, ::-1], index=ids)}
    graphs = [sw.GraphFusion(n_neighbours=10, neighbour_search="approximate", random_state=8).fit(data)
              for _ in range(2)]
    assert (graphs[0].affinity_ != graphs[1].affinity_).nnz == 0
    assert graphs[0].neighbour_search_ == {"a": "approximate", "b": "approximate"}


def test_rows_without_themselves_or_left_short_still_get_their_exact_neighbours(monkeypatch):
    matrix = np.random.default_rng(2).normal(size=(60, 5))
    k = 6
    _, with_self = NearestNeighbors(n_neighbors=k + 1).fit(matrix).kneighbors(matrix)
    _, without_self = NearestNeighbors(n_neighbors=k + 1).fit(matrix).kneighbors()
    found = with_self.copy()
    found[:10] = without_self[:10]  # the descent may list k + 1 others and not the row itself
    found[10:15, -3:] = -1  # or leave gaps (pynndescent marks them -1)

    class Descent:  # stands in for pynndescent's index: only its neighbour graph is read
        def __init__(self, data, **settings):
            self.neighbor_graph = (found, None)

    monkeypatch.setattr("pynndescent.NNDescent", Descent)
    space = prepare_rows(matrix, "euclidean")
    indices, distances = approximate_neighbours(space, k, seed=1)
    exact_indices, exact_distances = nearest_neighbours(space, k)
    np.testing.assert_array_equal(indices, exact_indices)
    np.testing.assert_allclose(distances, exact_distances, atol=1e-12)


def test_auto_is_exact_up_to_the_threshold_and_approximate_above():
    assert chosen_search("auto", 400) == "exact"
    assert chosen_search("auto", APPROXIMATE_ABOVE) == "exact"
    assert chosen_search("auto", APPROXIMATE_ABOVE + 1) == "approximate"
    assert chosen_search("exact", 10 * APPROXIMATE_ABOVE) == "exact"
    assert chosen_search("approximate", 50) == "approximate"


def test_auto_is_exact_without_pynndescent_and_approximate_then_says_how_to_install(monkeypatch):
    monkeypatch.setattr(neighbours, "approximate_available", lambda: False)
    assert chosen_search("auto", APPROXIMATE_ABOVE) == "exact"
    with pytest.warns(UserWarning, match="searched exactly, as pynndescent is not installed.*pip install"):
        assert chosen_search("auto", APPROXIMATE_ABOVE + 1) == "exact"
    with pytest.raises(InputError, match=r"^neighbour_search: .*pip install") as caught:
        chosen_search("approximate", 50)
    assert "\n" not in str(caught.value)


def test_an_unknown_search_names_the_parameter_and_the_choices():
    data = {"a": pd.DataFrame(np.random.default_rng(0).normal(size=(20, 4)))}
    expected = "neighbour_search: found 'fast'; expected one of 'auto', 'exact', 'approximate'"
    with pytest.raises(InputError, match=expected):
        fuse_modalities(data, n_neighbours=3, neighbour_search="fast")


def test_the_graph_records_the_search_of_each_modality():
    data = {"a": pd.DataFrame(np.random.default_rng(0).normal(size=(40, 4)))}
    parameters = fuse_modalities(data, n_neighbours=3).parameters
    assert parameters["neighbour_search"] == {"a": "exact"}
    assert parameters["neighbour_search_requested"] == "auto"
    assert parameters["approximate_above"] == APPROXIMATE_ABOVE
