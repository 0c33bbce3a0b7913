"""Do the groups differ in clinical variables? One test per variable, BH across variables.

Categorical variables use contingency-table tests and Cramer's V; continuous ones Kruskal-Wallis
(with one-way ANOVA beside it) and epsilon squared. Missing values are dropped per variable and
counted in the result.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from strataweave.errors import InputError
from strataweave.evaluate.clinical_summary import describe_by_group
from strataweave.evaluate.contingency import contingency_test
from strataweave.evaluate.grouping import align, check_grouping, group_order
from strataweave.evaluate.multiple_testing import bh_adjust
from strataweave.evaluate.result import Evaluation, plain
from strataweave.seeding import child_seeds


ASSOCIATION_COLUMNS = ("variable", "kind", "test", "statistic", "df", "p_value", "p_adjusted", "effect_size",
                       "effect_size_name", "anova_statistic", "anova_p_value", "n_used", "n_missing", "status")


def _is_categorical(values: pd.Series, name: str, categorical) -> bool:
    return name in categorical or not pd.api.types.is_numeric_dtype(values) or pd.api.types.is_bool_dtype(values)


def _categorical_row(labels, values, groups, n_monte_carlo, seed) -> tuple[dict, pd.DataFrame]:
    group_codes = pd.Categorical(labels, categories=groups).codes
    levels, level_codes = np.unique(values.astype(str).to_numpy(), return_inverse=True)
    present = np.unique(group_codes)
    counts = pd.crosstab(labels.to_numpy(), values.astype(str).to_numpy()).reindex(groups, fill_value=0)
    counts_long = counts.stack().rename("count").reset_index().set_axis(["group", "level", "count"], axis=1)
    if levels.size < 2 or present.size < 2:
        return {"kind": "categorical", "test": "not tested", "effect_size_name": "cramers_v",
                "status": "not tested: fewer than 2 levels or groups with data"}, counts_long
    codes = np.searchsorted(present, group_codes)
    result = contingency_test(codes, level_codes.astype(np.intp), n_monte_carlo, seed)
    row = {
        "kind": "categorical",
        "test": result.test,
        "statistic": result.statistic,
        "df": result.df,
        "p_value": result.p_value,
        "effect_size": result.cramers_v,
        "effect_size_name": "cramers_v",
        "status": "tested",
    }
    return row, counts_long


def _continuous_row(labels, values, groups) -> tuple[dict, pd.DataFrame]:
    numbers = values.astype(float)
    samples = [numbers[(labels == g).to_numpy()].to_numpy() for g in groups]
    samples = [s for s in samples if s.size]
    described = numbers.groupby(labels.to_numpy()).describe().reindex(groups)
    summary = described[["count", "mean", "25%", "50%", "75%"]].set_axis(["n", "mean", "q1", "median", "q3"], axis=1)
    summary = summary.rename_axis("group").reset_index()
    if len(samples) < 2 or np.ptp(numbers.to_numpy()) == 0:
        return {"kind": "continuous", "test": "not tested", "effect_size_name": "epsilon_squared",
                "status": "not tested: fewer than 2 groups with data or a constant variable"}, summary
    kruskal = stats.kruskal(*samples)
    anova = stats.f_oneway(*samples)
    n = numbers.size
    row = {
        "kind": "continuous",
        "test": "kruskal_wallis",
        "statistic": float(kruskal.statistic),
        "df": len(samples) - 1,
        "p_value": float(kruskal.pvalue),
        "effect_size": float(kruskal.statistic) / (n - 1),  # epsilon squared, H / ((n^2 - 1) / (n + 1))
        "effect_size_name": "epsilon_squared",
        "anova_statistic": float(anova.statistic),
        "anova_p_value": float(anova.pvalue),
        "status": "tested",
    }
    return row, summary


def associate_clinical(
    grouping: pd.Series,
    clinical: pd.DataFrame,
    clinical_columns: list[str] | None = None,
    categorical_columns: tuple[str, ...] | list[str] = (),
    n_monte_carlo: int = 10_000,
    random_state=None,
) -> Evaluation:
    """One association test per clinical variable (all columns unless `clinical_columns` is given).

    Text and boolean columns, and those named in `categorical_columns`, are treated as categorical.
    """
    labelled = check_grouping(grouping)
    variables = list(clinical.columns) if clinical_columns is None else list(clinical_columns)
    for name in [*variables, *categorical_columns]:
        if name not in clinical.columns:
            raise InputError(f"clinical table: no column {name!r}, expected it as a clinical variable to test")
    labels_all, table = align(labelled, clinical, "clinical table")
    groups = group_order(labels_all)
    seeds = child_seeds(random_state, max(1, len(variables)))
    rows, counts, summaries = [], [], []
    for name, seed in zip(variables, seeds):
        known = table[name].notna().to_numpy()
        labels, values = labels_all[known], table[name][known]
        if _is_categorical(values, name, categorical_columns):
            row, detail = _categorical_row(labels, values, groups, n_monte_carlo, seed)
            counts.append(detail.assign(variable=name))
        else:
            row, detail = _continuous_row(labels, values, groups)
            summaries.append(detail.assign(variable=name))
        rows.append({"variable": name, "n_used": int(known.sum()), "n_missing": int((~known).sum()), **row})
    # the full header even with no variables to test, or none of a kind
    association = pd.DataFrame(rows).reindex(columns=[c for c in ASSOCIATION_COLUMNS if c != "p_adjusted"])
    association.insert(6, "p_adjusted", bh_adjust(association["p_value"].to_numpy(dtype=float)))
    level_counts = pd.concat(counts, ignore_index=True)[["variable", "group", "level", "count"]] if counts else pd.DataFrame(columns=["variable", "group", "level", "count"])
    continuous = pd.concat(summaries, ignore_index=True) if summaries else pd.DataFrame(columns=["group", "n", "mean", "q1", "median", "q3", "variable"])
    continuous = continuous[["variable", "group", "n", "mean", "q1", "median", "q3"]]
    by_group = describe_by_group(labels_all, table, association, groups)
    tables = {"association": association, "level_counts": level_counts, "continuous_summary": continuous,
              "by_group": by_group}
    summary = {
        "n_patients": len(labels_all),
        "n_excluded_patients": int(len(labelled) - len(labels_all)),
        "groups": [str(g) for g in groups],
        "variables": association.assign(dropped=association["n_missing"]),
        "level_counts": level_counts.assign(group=level_counts["group"].astype(str)),
        "continuous_summary": continuous.assign(group=continuous["group"].astype(str)),
        "by_group": by_group,
    }
    return Evaluation(tables=tables, summary=plain(summary))
