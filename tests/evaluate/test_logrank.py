"""Log-rank tests against the Kleinbaum & Klein textbook value, scipy, lifelines and statsmodels."""

import numpy as np
import pytest
from lifelines.datasets import load_leukemia
from lifelines.statistics import multivariate_logrank_test
from scipy import stats
from statsmodels.duration.survfunc import survdiff

from strataweave.evaluate.logrank import logrank_permutation_p, logrank_test


def _random_survival(n, n_groups, seed, effect=0.0):
    rng = np.random.default_rng(seed)
    groups = rng.integers(0, n_groups, n)
    time = np.round(rng.exponential(10 * np.exp(-effect * groups)), 1) + 0.1  # rounding makes ties
    event = rng.uniform(size=n) < 0.7
    return time, event, groups


def test_leukemia_treatment_logrank_is_textbook_value():
    data = load_leukemia()  # lifelines ships the remission data of Kleinbaum & Klein
    result = logrank_test(data["t"], data["status"], data["Rx"])
    # Kleinbaum & Klein, Survival Analysis: A Self-Learning Text, chapter 2: log-rank chi-square 16.79
    assert result.statistic == pytest.approx(16.79, abs=0.005)
    assert result.df == 1


def test_two_groups_match_scipy_logrank():
    time, event, groups = _random_survival(150, 2, seed=1, effect=0.3)
    ours = logrank_test(time, event, groups)
    x = stats.CensoredData.right_censored(time[groups == 0], ~event[groups == 0])
    y = stats.CensoredData.right_censored(time[groups == 1], ~event[groups == 1])
    reference = stats.logrank(x, y)  # scipy.stats.logrank: z statistic, two-sided p
    assert ours.statistic == pytest.approx(reference.statistic**2, rel=1e-9)
    assert ours.p_value == pytest.approx(reference.pvalue, rel=1e-9)


def test_four_groups_match_lifelines():
    time, event, groups = _random_survival(300, 4, seed=2, effect=0.15)
    ours = logrank_test(time, event, groups)
    reference = multivariate_logrank_test(time, groups, event)  # lifelines as reference
    assert ours.statistic == pytest.approx(reference.test_statistic, rel=1e-9)
    assert ours.p_value == pytest.approx(reference.p_value, rel=1e-8)
    assert ours.df == 3


def test_stratified_matches_statsmodels_survdiff():
    time, event, groups = _random_survival(240, 3, seed=5, effect=0.2)
    strata = np.random.default_rng(6).integers(0, 3, time.size)
    ours = logrank_test(time, event, groups, strata=strata)
    statistic, p_value = survdiff(time, event.astype(int), groups, strata=strata)  # statsmodels
    assert ours.statistic == pytest.approx(statistic, rel=1e-9)
    assert ours.p_value == pytest.approx(p_value, rel=1e-8)


def test_one_stratum_equals_unstratified():
    time, event, groups = _random_survival(90, 3, seed=7)
    assert logrank_test(time, event, groups, strata=np.zeros(90)).statistic == pytest.approx(
        logrank_test(time, event, groups).statistic, rel=1e-12
    )


def test_permutation_p_approaches_asymptotic_for_large_balanced_groups():
    rng = np.random.default_rng(8)
    groups = np.repeat([0, 1], 250)
    time = rng.exponential(np.where(groups == 1, 1.2, 1.0))
    event = rng.uniform(size=500) < 0.8
    asymptotic = logrank_test(time, event, groups).p_value
    permutation = logrank_permutation_p(time, event, groups, n_permutations=4000, random_state=0)
    assert 0.01 < asymptotic < 0.5
    # Monte-Carlo error with 4000 permutations is about 0.008 at p = 0.2; allow about three of it
    assert permutation == pytest.approx(asymptotic, abs=0.025)


def test_permutation_p_is_seeded_and_never_zero():
    time, event, groups = _random_survival(60, 3, seed=9, effect=1.5)
    first = logrank_permutation_p(time, event, groups, n_permutations=500, random_state=11)
    assert first == logrank_permutation_p(time, event, groups, n_permutations=500, random_state=11)
    assert first >= 1 / 501
    done = []
    logrank_permutation_p(time, event, groups, n_permutations=500, random_state=11, progress=done.append)
    assert done[-1] == 500
