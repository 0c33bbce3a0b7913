"""Over-representation and the rank-based set test against Fisher's example and scipy."""

import json

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from strataweave import InputError
from strataweave.evaluate.enrichment import enrich_markers


def _marker_table(features, groups, score, selected):
    """A table shaped like find_markers' output with chosen scores and selected markers."""
    rows = []
    for g_index, group in enumerate(groups):
        for f_index, feature in enumerate(features):
            chosen = selected[g_index][f_index]
            rows.append(
                {
                    "group": group,
                    "feature": feature,
                    "difference": 1.0 if chosen else -0.1,
                    "score": score[g_index][f_index],
                    "p_adjusted": 0.001 if chosen else 0.9,
                }
            )
    return pd.DataFrame(rows)


def test_tea_tasting_as_over_representation():
    # Fisher (1935): of 8 cups (universe), 4 had milk first (the set); the lady picked 4 (selected
    # markers) and 3 were right. One-sided p = 17/70.
    cups = [f"cup{i}" for i in range(8)]
    picked = [[True, True, True, False, True, False, False, False]]
    table = _marker_table(cups, ["lady"], [list(range(8))], picked)
    result = enrich_markers(table, {"milk_first": cups[:4]}, min_set_size=1)
    row = result.tables["over_representation"].iloc[0]
    assert row["overlap"] == 3 and row["set_size"] == 4 and row["n_selected"] == 4
    assert row["p_value"] == pytest.approx(17 / 70)  # Fisher 1935


def test_over_representation_equals_hypergeometric_and_fisher_tails():
    rng = np.random.default_rng(0)
    features = [f"G{i}" for i in range(300)]
    selected = [rng.uniform(size=300) < 0.1, rng.uniform(size=300) < 0.2]
    table = _marker_table(features, ["x", "y"], rng.normal(size=(2, 300)), selected)
    sets = {f"S{k}": list(rng.choice(features, rng.integers(10, 60), replace=False)) for k in range(20)}
    result = enrich_markers(table, sets, min_set_size=5)
    ora = result.tables["over_representation"]
    for _, row in ora.sample(10, random_state=1).iterrows():
        members = np.isin(features, sets[row["set"]])
        chosen = selected[["x", "y"].index(row["group"])]
        k, big_k, n = int((members & chosen).sum()), int(members.sum()), int(chosen.sum())
        assert row["p_value"] == pytest.approx(stats.hypergeom.sf(k - 1, 300, big_k, n))  # scipy
        two_by_two = [[k, n - k], [big_k - k, 300 - big_k - n + k]]
        greater = stats.fisher_exact(two_by_two, alternative="greater").pvalue  # scipy, one-sided Fisher
        assert row["p_value"] == pytest.approx(greater)
    for group, part in ora.groupby("group"):
        np.testing.assert_allclose(
            part.set_index("set")["p_adjusted"].sort_index(),
            pd.Series(stats.false_discovery_control(part["p_value"]), index=part["set"]).sort_index(),  # scipy BH
        )


def test_rank_test_equals_scipy_mann_whitney_of_members_against_rest():
    rng = np.random.default_rng(1)
    features = [f"G{i}" for i in range(200)]
    score = np.round(rng.normal(size=(1, 200)), 1)  # rounding makes ties
    score[0, :15] += 1.5
    table = _marker_table(features, ["x"], score, [np.zeros(200, bool)])
    sets = {"shifted": features[:15] + features[100:105], "random": list(rng.choice(features, 25, replace=False))}
    rank_test = enrich_markers(table, sets).tables["rank_test"].set_index("set")
    for name, members in sets.items():
        inside = np.isin(features, members)
        reference = stats.mannwhitneyu(score[0, inside], score[0, ~inside], method="asymptotic")  # scipy
        assert rank_test.loc[name, "p_value"] == pytest.approx(reference.pvalue, rel=1e-9)
        assert rank_test.loc[name, "auc"] == pytest.approx(reference.statistic / (inside.sum() * (~inside).sum()))
    assert rank_test.index[0] == "shifted"


def test_set_size_limits_and_exclusions_are_counted():
    features = [f"G{i}" for i in range(50)]
    table = _marker_table(features, ["x"], [list(range(50))], [np.arange(50) < 10])
    sets = {"ok": features[:8], "small": features[:2], "large": features, "elsewhere": ["Z1", "Z2"]}
    result = enrich_markers(table, sets, min_set_size=3, max_set_size=40)
    assert result.summary["n_sets_tested"] == 1
    excluded = result.tables["excluded_sets"].set_index("set")["reason"]
    assert excluded["elsewhere"] == "no overlap with the measured features"
    assert excluded["small"].startswith("fewer than 3") and excluded["large"].startswith("more than 40")
    assert result.summary["rows"][0]["gene_set"] == "ok"
    json.dumps(result.summary)


def test_no_overlap_at_all_raises():
    features = [f"G{i}" for i in range(20)]
    table = _marker_table(features, ["x"], [list(range(20))], [np.arange(20) < 5])
    with pytest.raises(InputError, match="no member of any set is a measured feature"):
        enrich_markers(table, {"a": ["ENSG1", "ENSG2"], "b": ["ENSG3"]})
