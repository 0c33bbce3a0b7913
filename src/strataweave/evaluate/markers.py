"""Per-group markers: each group against the rest, every feature at once (Mann-Whitney or Welch t)."""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from strataweave.errors import InputError
from strataweave.evaluate.grouping import align, check_grouping, group_order, untestable
from strataweave.evaluate.multiple_testing import bh_adjust
from strataweave.evaluate.rank_tests import group_rank_sums, mann_whitney_from_rank_sums
from strataweave.evaluate.result import Evaluation, plain

TESTS = ("mann_whitney", "welch")


def _present_patients(data: pd.DataFrame, modality: str) -> pd.DataFrame:
    """Rows of patients measured on this modality; a missing value inside a measured row is bad input."""
    measured = data[data.notna().any(axis=1)]
    if measured.isna().to_numpy().any():
        row, column = np.argwhere(measured.isna().to_numpy())[0]
        raise InputError(
            f"modality {modality!r}, row {measured.index[row]!r}, column {measured.columns[column]!r}: "
            "found a missing value, expected complete rows for measured patients (impute or filter first)"
        )
    return measured


def marker_table(labels: pd.Series, data: pd.DataFrame, groups: list, test: str = "mann_whitney") -> pd.DataFrame:
    """Long table, one row per group and feature: means, difference, AUC, score, p and BH-adjusted p.

    `score` is the signed statistic (Mann-Whitney z or Welch t; positive means higher in the group).
    """
    if test not in TESTS:
        raise InputError(f"marker test: found {test!r}, expected one of {', '.join(TESTS)}")
    values = data.to_numpy(dtype=float)
    n = values.shape[0]
    codes = pd.Categorical(labels, categories=groups).codes.astype(np.intp)
    membership = (codes == np.arange(len(groups))[:, None]).astype(float)  # groups x patients
    sizes = membership.sum(axis=1)[:, None]
    rank_sums, tie_term = group_rank_sums(values, codes, len(groups))
    rank_test = mann_whitney_from_rank_sums(rank_sums, sizes, n, tie_term[None, :])
    group_sum = membership @ values
    group_mean = group_sum / sizes
    rest_mean = (values.sum(axis=0) - group_sum) / (n - sizes)
    if test == "welch":
        in_group = membership.astype(bool)
        welch = [stats.ttest_ind(values[m], values[~m], equal_var=False, axis=0) for m in in_group]
        score = np.stack([w.statistic for w in welch])
        p_value = np.stack([w.pvalue for w in welch])
    else:
        score, p_value = rank_test.z, rank_test.p_value
    p_adjusted = bh_adjust(p_value)
    n_groups, n_features = p_value.shape
    return pd.DataFrame(
        {
            "group": np.repeat(np.asarray(groups, dtype=object), n_features),
            "feature": np.tile(data.columns.to_numpy(dtype=object), n_groups),
            "mean_group": group_mean.ravel(),
            "mean_rest": rest_mean.ravel(),
            "difference": (group_mean - rest_mean).ravel(),
            "auc": rank_test.auc.ravel(),
            "score": score.ravel(),
            "p_value": p_value.ravel(),
            "p_adjusted": p_adjusted.ravel(),
        }
    )


def top_markers(table: pd.DataFrame, top_n: int, fdr: float) -> pd.DataFrame:
    """Per group, up to `top_n` rows higher in the group with adjusted p below `fdr`, best first."""
    up = table[(table["difference"] > 0) & (table["p_adjusted"] < fdr)]
    ranked = up.sort_values(["p_adjusted", "auc"], ascending=[True, False], kind="mergesort")
    order = {g: i for i, g in enumerate(pd.unique(table["group"]))}
    top = ranked.groupby("group", sort=False).head(top_n)
    return top.iloc[np.argsort(top["group"].map(order).to_numpy(), kind="stable")].reset_index(drop=True)


def find_markers(
    grouping: pd.Series,
    data: pd.DataFrame,
    modality: str = "modality",
    marker_test: str = "mann_whitney",
    markers_per_subtype: int = 20,
    marker_fdr: float = 0.05,
) -> Evaluation:
    """Markers of each group against the rest on one modality (patients x features, normalised scale).

    `marker_test` ranks each feature; up to `markers_per_subtype` features higher in the group,
    with adjusted p below `marker_fdr`, are the group's top markers. Patients not measured on the
    modality (all-NaN rows) are dropped and counted.
    """
    labelled = check_grouping(grouping)
    measured = _present_patients(data, modality)
    labels, measured = align(labelled, measured, f"modality {modality!r}")
    groups = group_order(labels)
    table = marker_table(labels, measured, groups, marker_test)
    top = top_markers(table, markers_per_subtype, marker_fdr)
    summary = {
        "modality": modality,
        "test": marker_test,
        "n_patients": len(labels),
        "n_features": measured.shape[1],
        "n_excluded_patients": int(len(labelled) - len(labels)),
        "fdr": marker_fdr,
        "n_significant_up": {str(g): int(((table["group"] == g) & (table["difference"] > 0) & (table["p_adjusted"] < marker_fdr)).sum()) for g in groups},
        "rows": pd.DataFrame(
            {
                "subtype": top["group"].astype(str),
                "feature": top["feature"].astype(str),
                "effect": top["difference"],
                "auc": top["auc"],
                "score": top["score"],
                "p_value": top["p_value"],
                "p_adjusted": top["p_adjusted"],
            }
        ),
    }
    return Evaluation(tables={"markers": table, "top_markers": top}, summary=plain(summary))


def untestable_modality(grouping: pd.Series, data: pd.DataFrame, modality: str = "modality") -> str | None:
    """Why `find_markers` cannot test this grouping on `data`, in words, or None when it can.

    The patients measured on the modality (not all-NaN rows) must hold at least 2 groups and
    no group of a single patient; a small subtype that is mostly unmeasured fails this.
    """
    return untestable(grouping, data.index[data.notna().any(axis=1).to_numpy()], f"measured in {modality}")


def markers_by_modality(grouping: pd.Series, views: dict[str, pd.DataFrame], **options) -> Evaluation:
    """find_markers for each modality: tables keyed by modality name, summaries likewise."""
    results = {name: find_markers(grouping, data, modality=name, **options) for name, data in views.items()}
    return Evaluation(
        tables={name: r.tables["markers"] for name, r in results.items()},
        summary={name: r.summary for name, r in results.items()},
    )
