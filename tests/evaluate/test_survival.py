"""Survival evaluation against the Kleinbaum & Klein leukemia data and lifelines."""

import json

import numpy as np
import pandas as pd
import pytest
from lifelines import KaplanMeierFitter
from lifelines.utils import restricted_mean_survival_time

from strataweave import InputError
from strataweave.evaluate.rmst import rmst_with_variance
from strataweave.evaluate.survival import evaluate_survival, untestable_outcome


def _by_group(rows, key="group"):
    return {row[key]: row for row in rows}


def test_leukemia_medians_logrank_and_cox(leukemia):
    grouping, data = leukemia
    result = evaluate_survival(grouping, data, "t", "status", n_permutations=200, random_state=0)
    summary = result.summary
    medians = _by_group(summary["medians"])
    # Kleinbaum & Klein, chapter 2: Kaplan-Meier medians 23 weeks (6-MP) and 8 weeks (placebo)
    assert medians["treatment"]["median"] == 23
    assert medians["placebo"]["median"] == 8
    assert summary["logrank"]["statistic"] == pytest.approx(16.79, abs=0.005)  # Kleinbaum & Klein
    assert summary["logrank"]["p_value_permutation"] == pytest.approx(1 / 201)
    (term,) = summary["cox"]
    assert term["term"] == "group treatment vs placebo"
    # lifelines (Efron ties) gives 1/4.82 for treatment vs placebo; the textbook's 4.523 uses Breslow ties
    assert 1 / term["hazard_ratio"] == pytest.approx(4.82, abs=0.01)
    assert term["ci_lower"] < term["hazard_ratio"] < term["ci_upper"]
    assert 0.5 < summary["concordance"] <= 1
    json.dumps(summary)


def test_leukemia_cox_with_covariates_and_stratified_logrank(leukemia):
    grouping, data = leukemia
    data = data.copy()
    data.loc[["P00", "P30"], "logWBC"] = np.nan
    data["sex"] = data["sex"].map({0: "female", 1: "male"})
    result = evaluate_survival(
        grouping, data, "t", "status", covariates=["logWBC", "sex"], strata="sex",
        events_per_term=5, n_permutations=0,
    )
    summary = result.summary
    assert summary["n_excluded"]["missing_covariates"] == 2
    assert [row["term"] for row in summary["cox"]] == ["group treatment vs placebo", "logWBC", "sex male vs female"]
    assert summary["stratified"]["status"] == "tested" and summary["stratified"]["n_strata"] == 2
    assert summary["logrank"]["p_value_permutation"] is None
    assert set(result.tables) >= {"logrank", "pairwise", "medians", "cox", "ph_check", "rmst", "km"}


def test_km_curves_and_numbers_at_risk(leukemia):
    grouping, data = leukemia
    km = evaluate_survival(grouping, data, "t", "status", n_permutations=0).summary["km"]
    curves = _by_group(km["curves"])
    reference = KaplanMeierFitter().fit(data["t"][data["Rx"] == 1], data["status"][data["Rx"] == 1])  # lifelines
    np.testing.assert_allclose(curves["placebo"]["survival"], reference.survival_function_.iloc[:, 0])
    assert curves["placebo"]["time"][0] == 0
    lower, upper = np.array(curves["placebo"]["lower"]), np.array(curves["placebo"]["upper"])
    assert (lower <= np.array(curves["placebo"]["survival"]) + 1e-12).all() and (upper <= 1 + 1e-12).all()
    ticks = np.array(km["at_risk_time"])
    expected = [[int((data["t"][data["Rx"] == rx] >= t).sum()) for t in ticks] for rx in (1, 0)]
    assert km["at_risk"] == expected  # groups in order: placebo, treatment


def test_rmst_matches_lifelines_and_uncensored_variance():
    rng = np.random.default_rng(2)
    time = rng.exponential(5, 60)
    event = (rng.uniform(size=60) < 0.7).astype(float)
    mean, _ = rmst_with_variance(time, event, 6.0)
    fitted = KaplanMeierFitter().fit(time, event)
    assert mean == pytest.approx(restricted_mean_survival_time(fitted, t=6.0), rel=1e-9)  # lifelines
    # Without censoring the Kaplan-Meier curve is the empirical one, so the estimator's variance is
    # the plug-in variance of min(T, horizon) divided by n.
    _, variance = rmst_with_variance(time, np.ones(60), 6.0)
    assert variance == pytest.approx(np.var(np.minimum(time, 6.0)) / 60, rel=1e-9)


def test_rmst_differences_and_default_horizon(leukemia):
    grouping, data = leukemia
    summary = evaluate_survival(grouping, data, "t", "status", n_permutations=0).summary
    assert summary["rmst_horizon"] == 23  # longest placebo follow-up, shorter than the treatment arm's
    (difference,) = summary["rmst_differences"]
    rmst = _by_group(summary["rmst"])
    assert difference["difference"] == pytest.approx(rmst["placebo"]["rmst"] - rmst["treatment"]["rmst"])
    assert difference["ci_lower"] < difference["difference"] < difference["ci_upper"]


def test_guard_rails_say_not_tested(leukemia):
    grouping, data = leukemia
    grouping = grouping.copy()
    grouping.iloc[:3] = "tiny"
    summary = evaluate_survival(grouping, data, "t", "status", n_permutations=100).summary
    assert summary["logrank"]["p_value"] is None and summary["logrank"]["p_value_permutation"] is None
    assert summary["not_tested"].startswith("not tested: group tiny has 3 patients")
    assert summary["status"]["cox"].startswith("not tested")
    pairs = {(row["group_a"], row["group_b"]): row for row in summary["pairwise"]}
    assert pairs[("placebo", "treatment")]["status"] == "tested"
    assert pairs[("placebo", "tiny")]["p_value"] is None
    few_events = evaluate_survival(leukemia[0], data, "t", "status", min_events=40, n_permutations=0).summary
    assert few_events["not_tested"] == "not tested: too few events (30, fewer than 40)"


@pytest.mark.parametrize(
    ("column", "value", "message"),
    [
        ("t", -1.0, "row 'P05', column 't': found -1, expected a non-negative follow-up time"),
        ("status", 2, "row 'P05', column 'status': found 2, expected 0, 1, True or False"),
    ],
)
def test_bad_outcome_values_raise(leukemia, column, value, message):
    grouping, data = leukemia
    data = data.copy()
    data.loc["P05", column] = value
    with pytest.raises(InputError, match=message):
        evaluate_survival(grouping, data, "t", "status", n_permutations=0)


def test_missing_outcome_and_unlabelled_patients_are_dropped_and_counted(leukemia):
    grouping, data = leukemia
    data = data.copy()
    data.loc[["P01", "P02"], "t"] = np.nan
    grouping = grouping.copy()
    grouping["P10"] = None
    summary = evaluate_survival(grouping, data, "t", "status", n_permutations=0).summary
    assert summary["n_excluded"]["missing_outcome"] == 2 and summary["n_excluded"]["unlabelled"] == 1
    assert summary["n_patients"] == 39


def test_group_of_one_patient_and_missing_column_raise(leukemia):
    grouping, data = leukemia
    lonely = grouping.copy()
    lonely.iloc[0] = "alone"
    with pytest.raises(InputError, match="group 'alone' has 1 patient"):
        evaluate_survival(lonely, data, "t", "status", n_permutations=0)
    with pytest.raises(InputError, match="all belong to group 'placebo', expected at least 2 groups"):
        evaluate_survival(grouping, data[data["Rx"] == 1], "t", "status", n_permutations=0)
    with pytest.raises(InputError, match="no column 'months'"):
        evaluate_survival(grouping, data, "months", "status")
    with pytest.raises(InputError, match="no column 'centre'"):
        evaluate_survival(grouping, data, "t", "status", covariates=["centre"], n_permutations=0)


def test_a_group_with_one_known_outcome_is_said_untestable_in_words(leukemia):
    grouping, data = leukemia
    assert untestable_outcome(grouping, data, "t", "status") is None
    data = data.copy()
    data.loc[grouping.index[grouping == "placebo"][1:], "t"] = np.nan
    assert untestable_outcome(grouping, data, "t", "status") == (
        "group 'placebo' has 1 patient with a known survival time and event, expected at least 2 groups of 2 or more")
    with pytest.raises(InputError, match="group 'placebo' has 1 patient"):  # what evaluate_survival would do instead
        evaluate_survival(grouping, data, "t", "status", n_permutations=0)
