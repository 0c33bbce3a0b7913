"""fuse_modalities end to end: missing patients, fallback, restriction, memory, bad input."""

import tracemalloc

import numpy as np
import pandas as pd
import pytest

from strataweave import InputError
from strataweave.graph import fuse_modalities
from strataweave.graph import metrics
from strataweave.graph.pairs import symmetric_matrix


def _frame(matrix, ids):
    return pd.DataFrame(matrix, index=ids, columns=[f"g{j}" for j in range(matrix.shape[1])])


@pytest.fixture
def two_modalities():
    rng = np.random.default_rng(21)
    ids = [f"p{i:02d}" for i in range(40)]
    return {"expr": _frame(rng.normal(size=(40, 5)), ids),
            "meth": _frame(rng.normal(size=(30, 4)), ids[10:])}


def test_patients_missing_a_modality_have_no_edges_in_it(two_modalities):
    graph = fuse_modalities(two_modalities, n_neighbours=5)
    assert list(graph.patients) == [f"p{i:02d}" for i in range(40)]
    meth = graph.modality_graphs["meth"]
    assert np.diff(meth.indptr)[:10].sum() == 0 and (np.diff(meth.indptr)[10:] >= 5).all()
    assert graph.presence["meth"].sum() == 30 and graph.presence["expr"].all()
    assert (graph.degree >= 1).all()


def test_inputs_are_not_modified(two_modalities):
    before = {name: frame.copy() for name, frame in two_modalities.items()}
    fuse_modalities(two_modalities, rule="diffusion", n_neighbours=5, diffusion_iterations=2)
    for name, frame in two_modalities.items():
        pd.testing.assert_frame_equal(frame, before[name])


def test_fallback_connects_patients_the_rule_leaves_alone_via_the_average_graph():
    rng = np.random.default_rng(22)
    ids = [f"p{i:02d}" for i in range(30)]
    far = rng.normal(size=(30, 3))
    far[0] += 1e3  # p00 is far from everyone in this modality: its Gaussian values underflow to 0
    data = {"a": _frame(far, ids), "b": _frame(rng.normal(size=(30, 3)), ids)}
    graph = fuse_modalities(data, rule="intersection", n_neighbours=4, kernel="gaussian", bandwidth=1.0)
    assert list(graph.fallback_patients) == ["p00"]
    record = graph.fallback_record()
    assert record.loc["p00", "fallback_edges"] >= 4 and record.loc["p00", "modalities"] == "a,b"
    average = fuse_modalities(data, rule="average", n_neighbours=4, kernel="gaussian", bandwidth=1.0)
    row = graph.affinity[0].toarray().ravel()
    # fallback weights are the average graph's values: half of modality b's kernel value
    b_kernel = np.exp(-0.5 * np.sum((data["b"].to_numpy()[0] - data["b"].to_numpy()) ** 2, axis=1))
    np.testing.assert_allclose(row[row > 0], 0.5 * b_kernel[row > 0], rtol=1e-10)
    assert len(average.fallback_patients) == 0


def test_fusing_kernels_before_cutting_keeps_edges_that_cutting_first_loses():
    rng = np.random.default_rng(23)
    ids = [f"p{i:03d}" for i in range(150)]
    labels = np.repeat(np.arange(3), 50)
    data = {f"m{v}": _frame(rng.normal(scale=1.5, size=(3, 30))[labels] + rng.normal(size=(150, 30)), ids)
            for v in range(3)}
    graph = fuse_modalities(data, rule="intersection", n_neighbours=10)
    singles = [fuse_modalities({name: frame}, n_neighbours=10).affinity for name, frame in data.items()]
    cut_first = singles[0].minimum(singles[1]).minimum(singles[2])
    assert (np.diff(cut_first.indptr) == 0).sum() > 0
    assert cut_first.nnz < graph.affinity.nnz / 3
    assert len(graph.isolated_patients) == 0


def test_restrict_follows_the_order_given(two_modalities):
    graph = fuse_modalities(two_modalities, n_neighbours=5)
    subset = ["p15", "p03", "p22", "p11"]
    sub = graph.restrict(subset)
    positions = graph.patients.get_indexer(subset)
    np.testing.assert_array_equal(sub.affinity.toarray(), graph.affinity.toarray()[np.ix_(positions, positions)])
    assert list(sub.patients) == subset and list(sub.presence.index) == subset
    np.testing.assert_array_equal(sub.modality_graphs["meth"].toarray(),
                                  graph.modality_graphs["meth"].toarray()[np.ix_(positions, positions)])
    with pytest.raises(InputError, match="'zz'.*not in the graph"):
        graph.restrict(["p01", "zz"])
    with pytest.raises(InputError, match="more than once"):
        graph.restrict(["p01", "p01"])


def test_progress_is_called_twice_per_modality(two_modalities):
    calls = []
    fuse_modalities(two_modalities, n_neighbours=5, progress=calls.append)
    assert calls == [1, 2, 3, 4]


def test_no_patient_by_patient_dense_array_is_allocated(monkeypatch):
    monkeypatch.setattr(metrics, "BLOCK_ELEMENTS", 2**19)
    n = 3000
    rng = np.random.default_rng(24)
    ids = [f"p{i}" for i in range(n)]
    data = {f"m{v}": _frame(rng.normal(size=(n, 3)), ids) for v in range(2)}
    tracemalloc.start()
    try:
        fuse_modalities(data, rule="intersection", n_neighbours=10)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < n * n * 8 / 2, peak  # half of one N x N float64 array


def test_symmetric_matrix_drops_zero_values():
    matrix = symmetric_matrix(np.array([0, 1]), np.array([2, 2]), np.array([0.5, 0.0]), 3)
    assert matrix.nnz == 2 and matrix[0, 2] == matrix[2, 0] == 0.5


@pytest.mark.parametrize(
    "change, message",
    [
        (lambda d: d["expr"].iloc.__setitem__((3, 2), np.nan), r"'expr', patient 'p03', column 'g2'.*impute"),
        (lambda d: d.__setitem__("meth", d["meth"].assign(g1=1.0, g0=1.0, g2=1.0, g3=1.0)), "same value"),
        (lambda d: d.__setitem__("meth", d["meth"].set_axis([f"x{i}" for i in range(30)])), "no patient in common"),
        (lambda d: d.__setitem__("meth", d["meth"].assign(g0="a")), "column 'g0': found type object"),
        (lambda d: d.__setitem__("meth", d["meth"].iloc[:5]), "n_neighbours: found 5 for modality 'meth' with 5"),
        (lambda d: d.__setitem__("meth", d["meth"].values), "found ndarray; expected a DataFrame"),
        (lambda d: d.__setitem__("meth", pd.concat([d["meth"], d["meth"].iloc[:1]])), "'p10': found it more than once"),
    ],
)
def test_bad_input_is_one_clear_input_error(two_modalities, change, message):
    change(two_modalities)
    with pytest.raises(InputError, match=message) as caught:
        fuse_modalities(two_modalities, n_neighbours=5, metric="correlation")
    assert "\n" not in str(caught.value)


@pytest.mark.parametrize(
    "options, message",
    [
        ({"rule": "union"}, "rule: found 'union'; expected one of 'auto'"),
        ({"rule": "quorum", "quorum": 3}, "from 1 to 2"),
        ({"n_neighbours": 1}, "n_neighbours: found 1; expected an integer >= 2"),
        ({"metric": "manhattan"}, "metric: found 'manhattan'"),
        ({"metric": {"expr": "cosine", "meth": "manhattan"}}, "metric of modality 'meth'"),
        ({"metric": {"expr": "cosine"}}, "no entry for modality 'meth'"),
        ({"kernel": "laplace"}, "kernel: found 'laplace'"),
        ({"kernel_spread": 0}, "kernel_spread"),
        ({"rule": "diffusion", "diffusion_iterations": 0}, "diffusion_iterations: found 0"),
        ({"rule": "diffusion", "diffusion_neighbours": 2.5}, "diffusion_neighbours: found 2.5"),
    ],
)
def test_bad_settings_are_input_errors(two_modalities, options, message):
    with pytest.raises(InputError, match=message):
        fuse_modalities(two_modalities, **{"n_neighbours": 5, **options})


def test_zero_profile_under_cosine_is_an_input_error(two_modalities):
    two_modalities["expr"].iloc[7] = 0.0
    with pytest.raises(InputError, match="'p07': found all zeros"):
        fuse_modalities(two_modalities, n_neighbours=5, metric={"expr": "cosine", "meth": "euclidean"})


def test_empty_input_is_an_input_error():
    with pytest.raises(InputError, match="non-empty dict"):
        fuse_modalities({})


def test_missing_value_in_a_nullable_column_is_an_input_error(two_modalities):
    two_modalities["meth"] = two_modalities["meth"].astype("Float64")
    two_modalities["meth"].iloc[4, 1] = pd.NA
    with pytest.raises(InputError, match=r"'meth', patient 'p14', column 'g1'.*impute"):
        fuse_modalities(two_modalities, n_neighbours=5)
