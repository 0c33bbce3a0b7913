"""Vectorised marker tests against scipy and scikit-learn, feature by feature."""

import json

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy import stats
from sklearn.metrics import roc_auc_score

from strataweave import InputError
from strataweave.evaluate.markers import find_markers, markers_by_modality, untestable_modality
from strataweave.evaluate.rank_tests import column_ranks, group_rank_sums


def _modality(seed=0, n=60, p=40, ties=False):
    rng = np.random.default_rng(seed)
    ids = [f"P{i:02d}" for i in range(n)]
    grouping = pd.Series(np.repeat(["a", "b", "c"], n // 3), index=ids)
    values = rng.integers(0, 6, (n, p)).astype(float) if ties else rng.normal(size=(n, p))
    values[grouping.to_numpy() == "b", :5] += 2.0
    return grouping, pd.DataFrame(values, index=ids, columns=[f"F{j}" for j in range(p)])


@settings(max_examples=30, deadline=None)
@given(arrays(np.float64, st.tuples(st.integers(2, 12), st.integers(1, 5)), elements=st.integers(-3, 3).map(float)))
def test_column_ranks_equal_scipy_rankdata(values):
    ranks, tie_term = column_ranks(values)
    np.testing.assert_allclose(ranks, stats.rankdata(values, axis=0))  # scipy
    for column in range(values.shape[1]):
        _, counts = np.unique(values[:, column], return_counts=True)
        assert tie_term[column] == pytest.approx((counts**3 - counts).sum())


def test_group_rank_sums_equal_sums_of_scipy_ranks():
    grouping, data = _modality(ties=True)
    codes = pd.Categorical(grouping).codes
    sums, _ = group_rank_sums(data.to_numpy(), codes, 3)
    ranks = stats.rankdata(data.to_numpy(), axis=0)  # scipy
    np.testing.assert_allclose(sums, [ranks[codes == g].sum(axis=0) for g in range(3)])


@pytest.mark.parametrize("ties", [False, True])
def test_mann_whitney_equals_scipy_feature_by_feature(ties):
    grouping, data = _modality(ties=ties)
    table = find_markers(grouping, data).tables["markers"]
    in_group = (grouping == "b").to_numpy()
    ours = table[table["group"] == "b"].set_index("feature")
    for feature in data.columns:
        x, y = data[feature][in_group], data[feature][~in_group]
        reference = stats.mannwhitneyu(x, y, method="asymptotic")  # scipy, with continuity correction
        assert ours.loc[feature, "p_value"] == pytest.approx(reference.pvalue, rel=1e-9)
        assert ours.loc[feature, "auc"] == pytest.approx(reference.statistic / (x.size * y.size))
    first = data["F0"]
    assert ours.loc["F0", "auc"] == pytest.approx(roc_auc_score(in_group, first))  # scikit-learn


def test_welch_option_equals_scipy_ttest():
    grouping, data = _modality(seed=1)
    table = find_markers(grouping, data, marker_test="welch").tables["markers"]
    ours = table[table["group"] == "a"].set_index("feature")
    in_group = (grouping == "a").to_numpy()
    for feature in data.columns[:10]:
        reference = stats.ttest_ind(data[feature][in_group], data[feature][~in_group], equal_var=False)  # scipy
        assert ours.loc[feature, "score"] == pytest.approx(reference.statistic)
        assert ours.loc[feature, "p_value"] == pytest.approx(reference.pvalue)


def test_top_markers_effects_and_adjustment():
    grouping, data = _modality(seed=2)
    result = find_markers(grouping, data, markers_per_subtype=3)
    table = result.tables["markers"]
    b = table[table["group"] == "b"].set_index("feature")
    in_group = (grouping == "b").to_numpy()
    assert b.loc["F1", "difference"] == pytest.approx(data["F1"][in_group].mean() - data["F1"][~in_group].mean())
    rows = result.summary["rows"]
    assert {row["subtype"] for row in rows} == {"b"} and len(rows) == 3
    assert {row["feature"] for row in rows} <= {"F0", "F1", "F2", "F3", "F4"}
    assert all(row["effect"] > 0 for row in rows)
    json.dumps(result.summary)


def test_unmeasured_patients_dropped_and_gaps_rejected():
    grouping, data = _modality(seed=3)
    data = data.copy()
    data.iloc[:4] = np.nan
    result = markers_by_modality(grouping, {"rna": data})
    assert result.summary["rna"]["n_excluded_patients"] == 4 and result.summary["rna"]["n_patients"] == 56
    data.iloc[10, 3] = np.nan
    with pytest.raises(InputError, match="modality 'rna', row 'P10', column 'F3': found a missing value"):
        find_markers(grouping, data, modality="rna")
    with pytest.raises(InputError, match="expected one of mann_whitney, welch"):
        find_markers(grouping, data.iloc[:, :3].dropna(), marker_test="t")


def test_a_group_measured_once_is_said_untestable_in_words():
    grouping, data = _modality(seed=4)
    assert untestable_modality(grouping, data, "rna") is None
    data = data.copy()
    data.loc[grouping.index[grouping == "c"][1:]] = np.nan  # one patient of group c measured
    reason = untestable_modality(grouping, data, "rna")
    assert reason == "group 'c' has 1 patient measured in rna, expected at least 2 groups of 2 or more"
    with pytest.raises(InputError, match="group 'c' has 1 patient"):  # what find_markers would do instead
        find_markers(grouping, data, modality="rna")
    data.loc[grouping.index[grouping != "a"]] = np.nan
    assert untestable_modality(grouping, data, "rna").startswith("only group 'a' has patients measured in rna")
