"""Clinical association against Fisher's tea-tasting example, scipy and statsmodels."""

import json

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.stats.multitest import multipletests

from strataweave import InputError
from strataweave.evaluate.clinical import associate_clinical
from strataweave.evaluate.contingency import contingency_test, monte_carlo_p

# Fisher (1935), The Design of Experiments: 8 cups, 4 with milk first; the lady picks 4 and gets
# 3 right. One-sided p = 17/70; the table's margins are symmetric, so the two-sided p is 34/70.
TEA_TRUTH = np.array([0, 0, 0, 0, 1, 1, 1, 1])
TEA_GUESS = np.array([0, 0, 0, 1, 0, 1, 1, 1])


def test_tea_tasting_fisher_exact():
    result = contingency_test(TEA_TRUTH, TEA_GUESS)
    assert result.test == "fisher_exact"
    assert result.p_value == pytest.approx(34 / 70)  # Fisher 1935: 2 x 17/70


def test_monte_carlo_p_on_tea_tasting_and_against_scipy_permutation():
    # chi-square ordering equals probability ordering for the tea table, so the exact p is 34/70
    assert monte_carlo_p(TEA_TRUTH, TEA_GUESS, 4000, random_state=0) == pytest.approx(34 / 70, abs=0.025)
    rng = np.random.default_rng(0)
    groups, levels = rng.integers(0, 3, 40), rng.choice(4, 40, p=[0.1, 0.4, 0.4, 0.1])
    table = np.zeros((3, 4), dtype=int)
    np.add.at(table, (groups, levels), 1)
    reference = stats.chi2_contingency(
        table, correction=False, method=stats.PermutationMethod(n_resamples=4000, rng=1)
    ).pvalue  # scipy's permutation version of the same test
    assert monte_carlo_p(groups, levels, 4000, random_state=2) == pytest.approx(reference, abs=0.03)


def test_chi_square_matches_scipy():
    rng = np.random.default_rng(1)
    groups, levels = rng.integers(0, 3, 300), rng.integers(0, 3, 300)
    result = contingency_test(groups, levels)
    table = pd.crosstab(groups, levels).to_numpy()
    reference = stats.chi2_contingency(table, correction=False)  # scipy
    assert result.test == "chi_square"
    assert result.statistic == pytest.approx(reference.statistic)
    assert result.p_value == pytest.approx(reference.pvalue)
    assert result.df == reference.dof


def test_cramers_v_is_one_for_a_perfect_association_and_zero_for_none():
    groups = np.repeat([0, 1, 2], 21)
    # Cramer's V is 1 where the group fixes the level (Cramer 1946, Mathematical Methods of Statistics; recalled from memory)
    assert contingency_test(groups, groups, n_monte_carlo=50, random_state=0).cramers_v == pytest.approx(1.0)
    assert contingency_test(groups, np.tile([0, 1, 2], 21), n_monte_carlo=50, random_state=0).cramers_v < 1e-12


def _cohort(seed=5, n=150):
    rng = np.random.default_rng(seed)
    ids = [f"P{i:03d}" for i in range(n)]
    grouping = pd.Series(rng.integers(1, 4, n), index=ids)
    clinical = pd.DataFrame(
        {
            "age": rng.normal(60, 8, n) + 4 * (grouping.to_numpy() == 3),
            "sex": rng.choice(["F", "M"], n),
            "stage": rng.choice(["I", "II", "III", "IV"], n, p=[0.04, 0.46, 0.46, 0.04]),
            "grade": rng.integers(1, 4, n),
        },
        index=ids,
    )
    return grouping, clinical


def test_association_table_tests_counts_and_adjusts():
    grouping, clinical = _cohort()
    clinical.loc[["P000", "P001", "P002"], "age"] = np.nan
    result = associate_clinical(grouping, clinical, categorical_columns=["grade"], n_monte_carlo=500, random_state=3)
    table = result.tables["association"].set_index("variable")
    assert table.loc["age", "test"] == "kruskal_wallis" and table.loc["age", "n_missing"] == 3
    assert table.loc["sex", "test"] == "chi_square"
    assert table.loc["stage", "test"] == "chi_square_monte_carlo"  # expected counts below 5
    assert table.loc["grade", "kind"] == "categorical"
    known = clinical["age"].notna()
    samples = [clinical["age"][known & (grouping == g)] for g in (1, 2, 3)]
    kruskal = stats.kruskal(*samples)  # scipy
    assert table.loc["age", "statistic"] == pytest.approx(kruskal.statistic)
    # epsilon squared = H / ((n^2 - 1) / (n + 1)), Tomczak & Tomczak 2014 (recalled from memory)
    assert table.loc["age", "effect_size"] == pytest.approx(kruskal.statistic * (147 + 1) / (147**2 - 1))
    assert table.loc["age", "anova_p_value"] == pytest.approx(stats.f_oneway(*samples).pvalue)  # scipy
    np.testing.assert_allclose(
        table["p_adjusted"], multipletests(table["p_value"], method="fdr_bh")[1]  # statsmodels
    )
    rows = {row["variable"]: row for row in result.summary["variables"]}
    assert rows["age"]["dropped"] == 3
    json.dumps(result.summary)


def test_untestable_variable_and_unknown_column():
    grouping, clinical = _cohort()
    clinical["site"] = "one site"
    row = associate_clinical(grouping, clinical, clinical_columns=["site"]).summary["variables"][0]
    assert row["p_value"] is None and row["status"].startswith("not tested")
    with pytest.raises(InputError, match="no column 'bmi'"):
        associate_clinical(grouping, clinical, clinical_columns=["bmi"])


def test_a_table_with_only_patient_ids_gives_empty_tables_with_their_header():
    grouping, clinical = _cohort()
    result = associate_clinical(grouping, clinical.iloc[:, :0])
    association = result.tables["association"]
    assert association.empty and list(association.columns)[:7] == [
        "variable", "kind", "test", "statistic", "df", "p_value", "p_adjusted"]
    assert result.summary["variables"] == [] and result.summary["n_patients"] == len(grouping)
    assert result.tables["level_counts"].empty and result.tables["continuous_summary"].empty
    json.dumps(result.summary)


def test_monte_carlo_is_seeded():
    grouping, clinical = _cohort()
    first = associate_clinical(grouping, clinical, clinical_columns=["stage"], n_monte_carlo=300, random_state=9)
    again = associate_clinical(grouping, clinical, clinical_columns=["stage"], n_monte_carlo=300, random_state=9)
    assert first.summary == again.summary


def test_clinical_summary_by_group_counts_levels_and_gives_median_and_iqr():
    ids = [f"P{i}" for i in range(8)]
    grouping = pd.Series(["A", "A", "A", "B", "B", "B", "B", "B"], index=ids)
    clinical = pd.DataFrame({"sex": ["F", "F", "M", "M", "M", "F", None, "M"],
                             "age": [40.0, 50.0, 60.0, 30.0, 31.0, 32.0, 33.0, 70.0]}, index=ids)
    result = associate_clinical(grouping, clinical)
    table = result.tables["by_group"]
    association = result.tables["association"].set_index("variable")
    assert list(table.columns) == ["variable", "level", "A", "B", "test", "p_adjusted"]
    sex = table[table["variable"] == "sex"].set_index("level")
    assert sex.loc["F", ["A", "B"]].tolist() == ["2 (67%)", "1 (25%)"]  # B: 4 patients with a known sex
    assert sex.loc["M", ["A", "B"]].tolist() == ["1 (33%)", "3 (75%)"]
    assert sex.loc["missing", ["A", "B"]].tolist() == ["0", "1"]
    assert sex["test"].tolist() == [association.at["sex", "test"], "", ""]
    age = table[table["variable"] == "age"].iloc[0]
    b_ages = np.array([30.0, 31.0, 32.0, 33.0, 70.0])
    q1, median, q3 = np.percentile(b_ages, [25, 50, 75])  # numpy's linear quantiles, as pandas
    assert age["level"] == "median [IQR]" and age["A"] == "50 [45\u201355]"
    assert age["B"] == f"{median:.3g} [{q1:.3g}\u2013{q3:.3g}]"
    assert age["p_adjusted"] == pytest.approx(association.at["age", "p_adjusted"])
    assert result.summary["by_group"][0]["variable"] == "sex"
