"""The sweep of subtype counts on a small invented cohort."""

import json
from dataclasses import replace

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.cluster.hierarchy import average, cophenet
from scipy.spatial.distance import squareform
from sklearn.metrics import adjusted_rand_score, silhouette_score

from cohort import prepared_cohort
from strataweave import CAUTION, InputError
from strataweave.graph import spectral_embedding
from strataweave.report.contract import check_results
from strataweave.subtypes.consensus import NOT_DRAWN
from strataweave.subtypes.parallel import ParallelSettings
from strataweave.subtypes.settings import SweepSettings
from strataweave.subtypes.sweep import planned_tasks, sweep_subtype_counts

COUNTS = [2, 3, 4]
SETTINGS = SweepSettings(n_resamples=4, min_size=5, resample_restarts=1)
FAST_NMF = {"max_iter": 60, "init": "random"}


@pytest.fixture(scope="module")
def cohort():
    return prepared_cohort(n_patients=90, n_subtypes=3, seed=3, top_features=40)


@pytest.fixture(scope="module")
def ticks():
    return []


@pytest.fixture(scope="module")
def result(cohort, ticks):
    return sweep_subtype_counts(
        cohort.views, cohort.graph, COUNTS, settings=SETTINGS, factorization=FAST_NMF, random_state=1,
        progress=ticks.append,
    )


def test_one_row_per_count_and_matching_shapes(result, cohort, ticks):
    n = len(cohort.graph.patients)
    assert ticks == list(range(1, planned_tasks(COUNTS, SETTINGS) + 1))
    assert list(result.criteria.index) == COUNTS
    assert list(result.criteria.columns) == [
        "pac", "cophenetic", "silhouette", "eigengap", "reconstruction_error", "smallest_subtype", "stability",
        "modularity",
    ]
    for k in COUNTS:
        consensus = result.consensus[k]
        assert consensus.shape == (n, n) and consensus.dtype == np.float32
        np.testing.assert_array_equal(consensus, consensus.T)
        drawn = result.resample_labels[k] != NOT_DRAWN
        assert (drawn.sum(axis=1) == 72).all()  # ceil(0.8 * 90) patients per resample
        assert np.all(np.diag(consensus)[drawn.any(axis=0)] == 1.0)
        table = result.assignments[k]
        assert table.index.equals(cohort.graph.patients)
        assert sorted(table["subtype"].unique()) == list(range(k))
        assert table["confidence"].between(0, 1).all()
        assert (table["core"] == (table["own_consensus"] > SETTINGS.core_threshold)).all()
        assert list(result.baseline_labels[k].columns) == ["spectral", "kmeans"]
    for k in COUNTS[:-1]:
        flow = result.flow[result.flow["count"] == k]
        assert flow["patients"].sum() == n
    assert result.models[result.count].patient_factor_.shape == (n, result.count)


def test_criteria_agree_with_reference_libraries(result, cohort):
    for k in COUNTS:
        labels = result.resample_labels[k]
        full = result.assignments[k]["subtype"].to_numpy()
        # reference: scikit-learn adjusted_rand_score on the drawn patients of each resample
        expected = np.mean([adjusted_rand_score(row[row >= 0], full[row >= 0]) for row in labels])
        assert result.criteria.loc[k, "stability"] == pytest.approx(expected)
        distances = squareform(1.0 - np.nan_to_num(result.consensus[k].astype(float), nan=0.5), checks=False)
        # reference: scipy.cluster.hierarchy.cophenet on the average-linkage tree
        assert result.criteria.loc[k, "cophenetic"] == pytest.approx(cophenet(average(distances), distances)[0])
        embedding = spectral_embedding(cohort.graph.affinity, n_dims=max(COUNTS))
        # reference: scikit-learn silhouette_score in the spectral embedding of the fused graph
        assert result.criteria.loc[k, "silhouette"] == pytest.approx(silhouette_score(embedding, full))
        assert result.criteria.loc[k, "smallest_subtype"] == np.bincount(full).min()


def test_to_dict_is_strict_json_and_meets_the_report_contract(result):
    section = result.to_dict()
    document = json.loads(json.dumps(section, allow_nan=False))
    document.update(caution=CAUTION, cohort={"patients": len(result.patients), "modalities": []})
    check_results(document)
    assert document["subtype_count"] == result.count
    assert document["selection"]["reason"] == result.recommendation.reason
    assert "subtypes:" not in document["selection"]["reason"]  # shown after the count, so it does not repeat it
    assert sum(document["subtypes"]["sizes"]) == len(result.patients)
    assert [row["method"] for row in document["baselines"]] == [
        "spectral clustering on the fused graph", "k-means on the concatenated scaled modalities"
    ]


def test_user_count_overrides_the_rule_but_not_min_size(result):
    other = next(k for k in COUNTS if k != result.count)
    chosen = result.with_user_count(other)
    assert (chosen.count, chosen.recommendation.rule_count) == (other, result.count)
    assert chosen.to_dict()["selection"]["overridden"] is True
    assert chosen.labels.equals(result.assignments[other]["subtype"])
    assert chosen.with_user_count(None).count == result.count
    smallest = result.criteria["smallest_subtype"]
    strict = replace(result, settings=replace(result.settings, min_size=int(smallest.max())))
    too_small = int(smallest.idxmin())
    with pytest.raises(InputError, match=f"found {too_small}, whose smallest subtype has {smallest.min()} patients"):
        strict.with_user_count(too_small)


@pytest.mark.slow
def test_labels_are_identical_on_serial_and_dask_and_warm_starts_with_feature_draws_run(result, cohort):
    dask = sweep_subtype_counts(
        cohort.views, cohort.graph, COUNTS, settings=SETTINGS, factorization=FAST_NMF, random_state=1,
        parallel=ParallelSettings("dask", n_jobs=2, local_cluster_processes=False),
    )
    for k in COUNTS:
        np.testing.assert_array_equal(dask.resample_labels[k], result.resample_labels[k])
        assert dask.assignments[k].equals(result.assignments[k])
    warm = sweep_subtype_counts(
        cohort.views, cohort.graph, [3],
        settings=SweepSettings(n_resamples=3, min_size=5, warm_start=True, feature_fraction=0.5, resample_restarts=1),
        factorization=FAST_NMF, random_state=1,
    )
    assert (warm.resample_labels[3] != NOT_DRAWN).sum(axis=1).tolist() == [72, 72, 72]


def test_counts_too_large_for_the_cohort_are_left_out(cohort):
    n = len(cohort.graph.patients)
    result = sweep_subtype_counts(cohort.views, cohort.graph, [2, n // 10 + 1], settings=replace(SETTINGS, min_size=10),
                                  factorization=FAST_NMF, random_state=0)
    assert result.counts == [2] and list(result.criteria.index) == [2]


@pytest.mark.parametrize(
    "counts, settings, message",
    [
        ([1, 2], SETTINGS, "counts: found 1; expected whole numbers >= 2"),
        ([10, 12], SweepSettings(min_size=10), "counts: found 10, 12, each leaving fewer than min_size=10"),
    ],
)
def test_bad_counts_are_input_errors(cohort, counts, settings, message):
    with pytest.raises(InputError, match=message):
        sweep_subtype_counts(cohort.views, cohort.graph, counts, settings=settings)


def test_bad_settings_and_misaligned_inputs_are_input_errors(cohort):
    for fraction in (0.0, 1.5):
        with pytest.raises(InputError, match=f"fraction: found {fraction}; expected a number > 0 and <= 1"):
            SweepSettings(fraction=fraction)
    with pytest.raises(InputError, match="graph: found"):
        sweep_subtype_counts(cohort.views, sp.identity(5, format="csr"), COUNTS)
    shuffled = cohort.graph.restrict(cohort.graph.patients[::-1])
    with pytest.raises(InputError, match="graph: patients differ"):
        sweep_subtype_counts(cohort.views, shuffled, COUNTS)
    with pytest.raises(InputError, match="factorization: found 'n_components'"):
        sweep_subtype_counts(cohort.views, cohort.graph, COUNTS, factorization={"n_components": 3})


def test_graph_partitions_match_scikit_learn_spectral_clustering():
    """One embedding for every count gives the partitions of scikit-learn's SpectralClustering
    (reference: sklearn.cluster.SpectralClustering with a precomputed affinity), count by count."""
    from sklearn.cluster import SpectralClustering
    from sklearn.datasets import make_blobs
    from sklearn.neighbors import kneighbors_graph

    from strataweave.subtypes.baselines import graph_partitions

    points, _ = make_blobs(240, centers=4, cluster_std=2.0, random_state=3)
    graph = kneighbors_graph(points, 10, include_self=False)
    affinity = ((graph + graph.T) / 2).tocsr()
    partitions = graph_partitions(affinity, [2, 3, 4, 5], random_state=0)
    for count, labels in partitions.items():
        reference = SpectralClustering(count, affinity="precomputed", random_state=0).fit_predict(affinity)
        assert adjusted_rand_score(labels, reference) > 0.99


def test_float32_factorisation_leaves_labels_and_criteria_of_float64():
    # The default dtype is float32 for speed; it must not change what the sweep reports.
    cohort = prepared_cohort(n_patients=150, n_subtypes=4, seed=6, top_features=60)
    settings = SweepSettings(n_resamples=6, min_size=5, labels_from="joint_model")
    sweeps = {
        dtype: sweep_subtype_counts(cohort.views, cohort.graph, [2, 3, 4, 5], settings=settings,
                                    factorization={"dtype": dtype}, random_state=4)
        for dtype in ("float32", "float64")
    }
    single, double = sweeps["float32"], sweeps["float64"]
    assert single.models[4].patient_factor_.dtype == np.float32
    for k in single.counts:
        np.testing.assert_array_equal(single.assignments[k]["subtype"], double.assignments[k]["subtype"])
        np.testing.assert_array_equal(single.resample_labels[k], double.resample_labels[k])
    criteria = ["pac", "stability", "cophenetic", "silhouette", "modularity"]
    np.testing.assert_allclose(single.criteria[criteria], double.criteria[criteria], atol=1e-6)
    assert single.count == double.count


def test_silhouettes_of_a_large_cohort_come_from_a_sample_close_to_the_exact_value(monkeypatch):
    from sklearn.datasets import make_blobs

    from strataweave.subtypes import sweep

    points, labels = make_blobs(3000, n_features=4, centers=4, cluster_std=3.0, random_state=5)
    exact = sweep._silhouette(points, labels)
    # scikit-learn's silhouette_score over all patients as the reference
    assert exact == pytest.approx(silhouette_score(points, labels))
    monkeypatch.setattr(sweep, "SILHOUETTE_SIDE", 500)
    sampled = sweep._silhouette(points, labels)
    assert sampled != exact and sampled == pytest.approx(exact, abs=0.03)
    assert sweep._silhouette(points, labels) == sampled  # seeded: the same sample every time
