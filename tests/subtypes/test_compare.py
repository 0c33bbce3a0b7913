"""Partition comparison: labels aligned by patient, tables labelled by group, flows between counts."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.metrics import adjusted_rand_score

from strataweave import InputError
from strataweave.subtypes.compare import compare_partitions, contingency_table, split_flow

labelings = st.lists(st.integers(0, 4), min_size=2, max_size=40)


@settings(max_examples=60, deadline=None)
@given(data=st.data())
def test_table_rows_are_the_first_labeling_and_renamed_labels_agree_fully(data):
    a = data.draw(labelings)
    b = data.draw(st.lists(st.integers(0, 3), min_size=len(a), max_size=len(a)))
    result = compare_partitions(np.array(a), np.array(b))
    table = result.contingency
    assert table.index.tolist() == sorted(set(a)) and table.columns.tolist() == sorted(set(b))
    assert table.sum(axis=1).tolist() == [a.count(x) for x in sorted(set(a))]
    assert result.n_patients == len(a) == int(table.to_numpy().sum())
    renamed = compare_partitions(np.array(a), np.array([f"S{x}" for x in a]))
    assert renamed.ari == pytest.approx(1.0) and renamed.nmi == pytest.approx(1.0)


def test_series_are_aligned_on_patient_ids_and_missing_labels_dropped():
    ours = pd.Series([0, 0, 1, 1, 2], index=["p1", "p2", "p3", "p4", "p5"])
    clinical = pd.Series(["x", None, "y", "y", "x", "z"], index=["p1", "p2", "p4", "p3", "p5", "p9"])
    result = compare_partitions(ours, clinical)
    assert result.n_patients == 4
    kept = ["p1", "p3", "p4", "p5"]
    # reference: scikit-learn on the same patients, aligned by hand
    assert result.ari == pytest.approx(adjusted_rand_score(ours[kept], clinical[kept]))
    assert result.to_dict()["contingency"]["2"] == {"x": 1, "y": 0}


def test_no_shared_patient_is_an_input_error():
    with pytest.raises(InputError, match="no patient"):
        compare_partitions(pd.Series([1], index=["a"]), pd.Series([1], index=["b"]))
    with pytest.raises(InputError, match="equal length"):
        contingency_table([0, 1], [0, 1, 1])


def test_split_flow_shows_one_subtype_splitting_in_two():
    at_2 = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    at_3 = np.array([0, 0, 2, 2, 1, 1, 1, 1])
    flow = split_flow(at_2, at_3)
    assert flow[["from_subtype", "to_subtype", "patients"]].values.tolist() == [[0, 0, 2], [0, 2, 2], [1, 1, 4]]
    assert flow["share_of_from"].tolist() == [0.5, 0.5, 1.0]
    # every patient of the smaller count is accounted for once
    assert flow.groupby("from_subtype")["share_of_from"].sum().tolist() == [1.0, 1.0]
