"""Properties of the fusion rules (hypothesis) on pair values and on whole fused graphs."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from strataweave import InputError
from strataweave.graph import fuse_modalities
from strataweave.graph.rules import combine_values


@st.composite
def pair_values(draw):
    """pairs x modalities kernel values in [0, 1], NaN where absent, at least one per pair."""
    n_pairs = draw(st.integers(1, 30))
    n_modalities = draw(st.integers(1, 4))
    values = draw(arrays(np.float64, (n_pairs, n_modalities), elements=st.floats(0, 1)))
    absent = draw(arrays(np.bool_, (n_pairs, n_modalities)))
    absent[np.arange(n_pairs), draw(st.integers(0, n_modalities - 1))] = False
    values[absent] = np.nan
    return values


@settings(max_examples=60, deadline=None)
@given(pair_values())
def test_intersection_is_below_every_input_and_equals_quorum_of_all(values):
    fused = combine_values(values, "intersection")
    present = ~np.isnan(values)
    assert (fused[:, None] <= np.where(present, values, np.inf)).all()
    # the minimum is one of the inputs (numpy nanmin as the reference)
    np.testing.assert_array_equal(fused, np.nanmin(values, axis=1))
    np.testing.assert_array_equal(combine_values(values, "quorum", values.shape[1]), fused)


@settings(max_examples=60, deadline=None)
@given(pair_values())
def test_quorum_is_monotone_and_one_is_the_maximum(values):
    m = values.shape[1]
    by_q = np.array([combine_values(values, "quorum", q) for q in range(1, m + 1)])
    assert (np.diff(by_q, axis=0) <= 0).all()
    np.testing.assert_array_equal(by_q[0], np.nanmax(values, axis=1))
    assert ((by_q >= 0) & (by_q <= 1)).all()


@settings(max_examples=60, deadline=None)
@given(pair_values())
def test_average_lies_between_intersection_and_maximum(values):
    average = combine_values(values, "average")
    assert (average >= combine_values(values, "intersection") - 1e-15).all()
    assert (average <= combine_values(values, "quorum", 1) + 1e-15).all()


@st.composite
def cohorts(draw):
    """Two or three small modalities over overlapping patients."""
    seed = draw(st.integers(0, 2**31 - 1))
    rng = np.random.default_rng(seed)
    n = draw(st.integers(12, 30))
    n_modalities = draw(st.integers(2, 3))
    ids = np.array([f"p{i:02d}" for i in range(n)])
    data = {}
    for m in range(n_modalities):
        keep = rng.random(n) > 0.2
        keep[: n // 2] = True  # shared core, so every pair of modalities overlaps
        data[f"m{m}"] = pd.DataFrame(rng.normal(size=(keep.sum(), 3)), index=ids[keep])
    return data


@settings(max_examples=25, deadline=None)
@given(cohorts(), st.sampled_from(["intersection", "quorum", "average", "diffusion"]))
def test_fused_graph_is_symmetric_in_unit_interval_with_zero_diagonal(data, rule):
    quorum = 1 if rule == "quorum" else None
    graph = fuse_modalities(data, rule=rule, quorum=quorum, n_neighbours=4, diffusion_iterations=3)
    a = graph.affinity
    assert abs(a - a.T).max() == 0
    assert a.diagonal().max() == 0
    assert a.data.min() > 0 and a.data.max() <= 1
    assert len(graph.isolated_patients) == 0


@settings(max_examples=15, deadline=None)
@given(cohorts())
def test_fused_intersection_is_below_each_modality_on_every_shared_pair(data):
    # one fixed bandwidth, so each modality's full kernel does not depend on the neighbour count
    n_min = min(len(frame) for frame in data.values())
    graph = fuse_modalities(data, rule="intersection", n_neighbours=n_min - 1, kernel="gaussian", bandwidth=1.0)
    fused = pd.DataFrame(graph.affinity.toarray(), index=graph.patients, columns=graph.patients)
    for name, frame in data.items():
        full = fuse_modalities({name: frame}, n_neighbours=len(frame) - 1, kernel="gaussian", bandwidth=1.0)
        kernel = full.modality_graphs[name].toarray()
        assert (fused.loc[full.patients, full.patients].to_numpy() <= kernel + 1e-15).all()


def test_quorum_of_whole_graphs_is_monotone_in_q():
    rng = np.random.default_rng(5)
    ids = [f"p{i}" for i in range(40)]
    data = {f"m{m}": pd.DataFrame(rng.normal(size=(40, 3)), index=ids) for m in range(3)}
    totals = [fuse_modalities(data, rule="quorum", quorum=q, n_neighbours=39).affinity.sum() for q in (1, 2, 3)]
    assert totals[0] > totals[1] > totals[2]
    intersection = fuse_modalities(data, rule="intersection", n_neighbours=39).affinity
    assert abs(fuse_modalities(data, rule="quorum", quorum=3, n_neighbours=39).affinity - intersection).max() == 0


@pytest.mark.parametrize(
    "rule, quorum, message",
    [("overlap", None, "rule: found 'overlap'; expected one of"),
     ("quorum", 0, "quorum: found 0; expected an integer >= 1"), ("quorum", 4, "from 1 to 3"), ("quorum", None, "from 1 to 3"), ("average", 2, "only with rule 'quorum'")],
)
def test_bad_rule_or_quorum_is_an_input_error(rule, quorum, message):
    rng = np.random.default_rng(0)
    data = {f"m{m}": pd.DataFrame(rng.normal(size=(12, 3))) for m in range(3)}
    with pytest.raises(InputError, match=message):
        fuse_modalities(data, rule=rule, quorum=quorum, n_neighbours=4)
