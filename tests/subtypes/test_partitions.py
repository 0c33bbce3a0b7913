"""The candidate partitions at one count and the agreement rule that picks among them."""

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.cluster import KMeans, SpectralClustering
from sklearn.datasets import make_blobs
from sklearn.metrics import adjusted_rand_score

from cohort import prepared_cohort
from strataweave import InputError
from strataweave.factorize import label_patients, scores_for_labels
from strataweave.graph import modularity
from strataweave.subtypes.partitions import (
    PARTITION_SOURCES,
    choose_partition,
    concatenation_partitions,
    graph_degree,
    joint_coordinates,
    modality_partitions,
)
from strataweave.seeding import child_seeds
from strataweave.subtypes import tasks
from strataweave.subtypes.baselines import concatenated_scaled, graph_partitions
from strataweave.subtypes.consensus import NOT_DRAWN
from strataweave.subtypes.settings import SweepSettings
from strataweave.subtypes.sweep import sweep_subtype_counts
from strataweave.subtypes.tasks import SweepInputs


def _cliques(sizes: list[int]) -> tuple[sp.csr_matrix, np.ndarray]:
    """Disconnected complete graphs of the given sizes, and each node's clique."""
    blocks = [np.ones((s, s)) - np.eye(s) for s in sizes]
    labels = np.repeat(np.arange(len(sizes)), sizes)
    return sp.csr_matrix(sp.block_diag(blocks)), labels


@pytest.mark.parametrize("n_cliques", [2, 3, 5])
def test_modularity_of_equal_disconnected_cliques_is_one_minus_one_over_their_count(n_cliques):
    # Newman 2006 (PNAS 103:8577): c equal disconnected groups split along the groups give Q = 1 - 1/c
    affinity, labels = _cliques([4] * n_cliques)
    assert modularity(affinity, labels) == pytest.approx(1 - 1 / n_cliques)
    assert modularity(affinity, np.zeros(labels.size, dtype=int)) == pytest.approx(0.0)


def test_modularity_matches_the_pair_sum_definition_on_a_weighted_graph():
    # the definition Q = 1/2m sum_ij (A_ij - k_i k_j / 2m) [c_i = c_j], summed pair by pair
    rng = np.random.default_rng(0)
    dense = np.triu(rng.random((12, 12)) * (rng.random((12, 12)) < 0.4), 1)
    dense = dense + dense.T
    labels = rng.integers(0, 3, 12)
    degree = dense.sum(axis=1)
    two_m = degree.sum()
    expected = sum(
        dense[i, j] - degree[i] * degree[j] / two_m for i in range(12) for j in range(12) if labels[i] == labels[j]
    ) / two_m
    assert modularity(sp.csr_matrix(dense), labels) == pytest.approx(expected)


def test_the_candidate_that_agrees_best_wins_and_a_tie_keeps_the_first():
    _, truth = _cliques([5, 5, 5])
    shuffled = np.random.default_rng(1).permutation(truth)
    everyone = np.arange(truth.size)
    votes = [(everyone, truth), (everyone, (truth + 1) % 3)]  # two modalities that see the planted groups
    source, labels, scores = choose_partition({"joint_model": shuffled, "fused_graph": truth}, votes)
    assert source == "fused_graph" and np.array_equal(labels, truth)
    # the mean adjusted Rand index with the other candidate and each vote (scikit-learn's adjusted_rand_score)
    expected = np.mean([adjusted_rand_score(shuffled, truth)] * 3)
    assert scores["joint_model"] == pytest.approx(expected) and scores["fused_graph"] == pytest.approx((expected + 2) / 3)
    renamed = (truth + 1) % 3  # the same partition under other codes: a tie
    source, _, _ = choose_partition({"joint_model": renamed, "fused_graph": truth}, votes)
    assert source == "joint_model"


def test_a_modality_votes_on_the_patients_it_holds_only():
    # Two cliques seen by a modality that holds only the first 8 patients: its partition of those
    # 8 picks the candidate that splits them the same way, whatever either does with the rest.
    graph, planted = _cliques([4, 4])
    holder = sp.csr_matrix(sp.block_diag([graph, sp.csr_matrix((6, 6))]))
    votes = modality_partitions([holder], [2], random_state=0)[2]
    assert len(votes) == 1 and np.array_equal(votes[0][0], np.arange(8))
    assert adjusted_rand_score(votes[0][1], planted) == 1.0
    agreeing = np.r_[planted, [0, 1, 0, 1, 0, 1]]
    other = np.r_[np.tile([0, 1], 4), [0, 0, 0, 1, 1, 1]]
    source, _, scores = choose_partition({"joint_model": other, "fused_graph": agreeing}, votes)
    assert source == "fused_graph" and scores["fused_graph"] > scores["joint_model"]
    assert modality_partitions([holder], [8, 9], random_state=0) == {8: [], 9: []}  # no count as large as its patients


def test_a_single_candidate_with_nothing_to_agree_with_is_taken():
    labels = np.array([0, 0, 1, 1])
    source, taken, scores = choose_partition({"concatenation": labels}, [])
    assert source == "concatenation" and taken is labels and np.isnan(scores["concatenation"])


def test_concatenation_partition_agrees_with_scikit_learn_spectral_clustering():
    # reference: scikit-learn's SpectralClustering with a symmetrised k-nearest-neighbour affinity
    points, _ = make_blobs(n_samples=240, centers=4, cluster_std=1.5, random_state=3)
    ours = concatenation_partitions(points, [4], 10, random_state=0)[4]
    theirs = SpectralClustering(4, affinity="nearest_neighbors", n_neighbors=10, random_state=0).fit_predict(points)
    assert adjusted_rand_score(ours, theirs) > 0.98


def test_joint_coordinates_keep_the_neighbourhoods_of_a_wide_concatenation():
    points, truth = make_blobs(n_samples=150, n_features=300, centers=3, random_state=4)
    reduced = joint_coordinates(points, random_state=0)
    assert reduced.shape == (150, 50)
    assert np.array_equal(joint_coordinates(points[:, :20], random_state=0), points[:, :20])  # narrow: kept
    assert adjusted_rand_score(truth, KMeans(3, n_init=5, random_state=0).fit_predict(reduced)) == 1.0


def test_graph_degree_is_the_mean_neighbour_count():
    affinity, _ = _cliques([6, 6])  # every node has 5 neighbours
    assert graph_degree(affinity) == 5


def test_scores_for_the_labellers_own_labels_match_its_scores():
    # reference: the k-means centres of label_patients are the means of their members at convergence
    W = np.abs(np.random.default_rng(2).normal(size=(80, 3))) + np.repeat(np.eye(3), [30, 30, 20], axis=0) * 3
    labels, confidence, scores = label_patients(W, 3, random_state=0)
    own_confidence, own_scores = scores_for_labels(W, labels, 3)
    np.testing.assert_allclose(own_scores, scores, atol=1e-6)
    np.testing.assert_allclose(own_confidence, confidence, atol=1e-6)


@pytest.fixture(scope="module")
def cohort():
    return prepared_cohort(n_patients=90, n_subtypes=3, seed=3, top_features=40)


def _sweep(cohort, labels_from):
    settings = SweepSettings(n_resamples=3, min_size=5, labels_from=labels_from)
    return sweep_subtype_counts(
        cohort.views, cohort.graph, [2, 3], settings=settings, factorization={"max_iter": 60}, random_state=1
    )


def test_the_sweep_records_each_counts_source_and_takes_the_best_agreeing_candidate(cohort):
    result = _sweep(cohort, "best_fit")
    table = result.partitions
    assert list(table.index) == [2, 3] and set(table["source"]) <= set(PARTITION_SOURCES)
    for count, row in table.iterrows():
        agreements = row[[f"agreement_{name}" for name in PARTITION_SOURCES]].astype(float)
        assert row[f"agreement_{row['source']}"] == agreements.max()
        labels = result.assignments[count]["subtype"].to_numpy()
        own = [modularity(graph, labels) for graph in cohort.graph.modality_graphs.values()]
        assert result.criteria.loc[count, "modularity"] == pytest.approx(np.mean(own))


def test_one_named_candidate_is_taken_at_every_count(cohort):
    result = _sweep(cohort, "fused_graph")
    assert list(result.partitions["source"]) == ["fused_graph", "fused_graph"]
    for count in (2, 3):
        spectral = result.baseline_labels[count]["spectral"].to_numpy()
        assert np.array_equal(result.assignments[count]["subtype"].to_numpy(), spectral)


def test_the_concatenation_reads_the_profiles_not_the_factorisation_input():
    # Two planted groups that only the profiles show: the views given to the factorisation are
    # noise. The k-means baseline and the concatenation partition read the profiles.
    rng = np.random.default_rng(4)
    truth = np.repeat([0, 1], 40)
    profiles = rng.normal(size=(80, 12)) + 4.0 * truth[:, None]
    views = {"layer": rng.random((80, 12))}
    graph = sp.csr_matrix(np.corrcoef(profiles) > 0.5, dtype=float)
    settings = SweepSettings(n_resamples=2, min_size=5, labels_from="concatenation")
    fit = {"max_iter": 20}
    given = sweep_subtype_counts(views, graph, [2], profiles={"layer": profiles}, settings=settings,
                                 factorization=fit, random_state=2)
    ignored = sweep_subtype_counts(views, graph, [2], settings=settings, factorization=fit, random_state=2)
    for result, expected in ((given, 1.0), (ignored, None)):
        kmeans = result.baseline_labels[2]["kmeans"].to_numpy()
        chosen = result.assignments[2]["subtype"].to_numpy()
        if expected is None:
            assert adjusted_rand_score(truth, kmeans) < 0.5 and adjusted_rand_score(truth, chosen) < 0.5
        else:
            assert adjusted_rand_score(truth, kmeans) == expected and adjusted_rand_score(truth, chosen) == expected
    with pytest.raises(InputError, match="profile 'layer'"):
        sweep_subtype_counts(views, graph, [2], profiles={"layer": profiles[:70]}, settings=settings,
                             factorization=fit, random_state=2)


def _resample_inputs(cohort, sources):
    views = {name: frame.to_numpy() for name, frame in cohort.views.items()}
    concatenated = concatenated_scaled(list(views.values()))
    affinity = sp.csr_matrix(cohort.graph.affinity)
    return SweepInputs(views, affinity, [2, 3], {"max_iter": 40}, SweepSettings(n_resamples=2, min_size=5),
                       concatenated, joint_coordinates(concatenated, 0), graph_degree(affinity), [affinity],
                       {2: [], 3: []}, sources=sources)


def test_a_resample_repeats_each_counts_full_data_choice(cohort, monkeypatch):
    fitted = []
    original = tasks._fit_and_label
    monkeypatch.setattr(tasks, "_fit_and_label", lambda *a, **k: fitted.append(a[2]) or original(*a, **k))
    seed = 11
    graph_only = tasks.fit_resample(_resample_inputs(cohort, {2: "fused_graph", 3: "fused_graph"}), (0, seed))
    assert fitted == []  # no NMF where no count's partition came from it
    drawn = graph_only.labels[0] != NOT_DRAWN
    restricted = sp.csr_matrix(cohort.graph.affinity)[drawn][:, drawn]
    # the seed layout of fit_resample's docstring: the graph partitions take child max(counts) + 1
    expected = graph_partitions(restricted, [2, 3], child_seeds(seed, 6)[4])
    for position, count in enumerate([2, 3]):
        assert np.array_equal(graph_only.labels[position, drawn], expected[count])
    mixed = tasks.fit_resample(_resample_inputs(cohort, {2: "joint_model", 3: "concatenation"}), (0, seed))
    assert fitted == [2]  # the joint NMF at the one count whose partition came from it
    assert np.array_equal(mixed.labels != NOT_DRAWN, graph_only.labels != NOT_DRAWN)  # the same draw
