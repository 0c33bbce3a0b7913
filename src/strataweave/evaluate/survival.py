"""Does survival differ between the groups of any grouping? Log-rank, Cox, Kaplan-Meier, RMST.

Tests are run only when the groups are large enough and enough events were seen; otherwise the
result says "not tested: ..." and carries no p-value.
"""

from __future__ import annotations

from itertools import combinations

import numpy as np
import pandas as pd

from strataweave.errors import InputError
from strataweave.evaluate import cox, kaplan_meier, rmst
from strataweave.evaluate.grouping import align, check_grouping, group_order, untestable
from strataweave.evaluate.logrank import logrank_permutation_p, logrank_test
from strataweave.evaluate.multiple_testing import bh_adjust
from strataweave.evaluate.outcome import read_outcome
from strataweave.evaluate.result import Evaluation, plain

TESTED = "tested"


def testable(labels: pd.Series, event: pd.Series, min_group_size: int, min_events: int) -> str:
    """'tested' when every group has `min_group_size` patients and `min_events` events were seen."""
    sizes = labels.value_counts()
    if sizes.min() < min_group_size:
        return f"not tested: group {sizes.idxmin()} has {sizes.min()} patients (fewer than {min_group_size})"
    events = int(event.sum())
    if events < min_events:
        return f"not tested: too few events ({events}, fewer than {min_events})"
    return TESTED


def _overall_logrank(time, event, labels, status, n_permutations, random_state, progress) -> dict:
    if status != TESTED:
        return {"statistic": None, "df": None, "p_value": None, "p_value_permutation": None}
    result = logrank_test(time, event, labels)
    permutation = (
        logrank_permutation_p(time, event, labels, n_permutations, random_state, progress) if n_permutations > 0 else None
    )
    return {"statistic": result.statistic, "df": result.df, "p_value": result.p_value, "p_value_permutation": permutation}


def _pairwise(time, event, labels, groups, min_group_size, min_events) -> pd.DataFrame:
    rows = []
    for a, b in combinations(groups, 2):
        members = labels.isin([a, b]).to_numpy()
        status = testable(labels[members], event[members], min_group_size, min_events)
        result = logrank_test(time[members], event[members], labels[members]) if status == TESTED else None
        rows.append(
            {
                "group_a": a,
                "group_b": b,
                "statistic": result.statistic if result else np.nan,
                "p_value": result.p_value if result else np.nan,
                "status": status,
            }
        )
    table = pd.DataFrame(rows)
    table.insert(4, "p_adjusted", bh_adjust(table["p_value"].to_numpy()))
    return table


def _stratified(clinical, strata, time, event, labels, min_group_size, min_events) -> dict | None:
    if strata is None:
        return None
    if strata not in clinical.columns:
        raise InputError(f"clinical table: no column {strata!r}, expected it to hold the strata for the log-rank test")
    values = clinical.loc[labels.index, strata]
    known = values.notna().to_numpy()
    summary = {
        "strata_column": strata,
        "n_strata": int(values.nunique()),
        "n_missing_strata": int((~known).sum()),
        "statistic": None,
        "df": None,
        "p_value": None,
    }
    status = testable(labels[known], event[known], min_group_size, min_events)
    if labels[known].nunique() < labels.nunique():
        status = "not tested: a group has no patient with a known stratum"
    summary["status"] = status
    if status == TESTED:
        result = logrank_test(time[known], event[known], labels[known], strata=values[known].astype(str))
        summary.update(statistic=result.statistic, df=result.df, p_value=result.p_value)
    return summary


def _cox(clinical, covariates, time, event, labels, groups, min_group_size, events_per_term, alpha):
    missing_columns = [c for c in covariates if c not in clinical.columns]
    if missing_columns:
        raise InputError(f"clinical table: no column {missing_columns[0]!r}, expected it as a Cox covariate")
    values = clinical.loc[labels.index, list(covariates)]
    complete = values.notna().all(axis=1).to_numpy()
    n_dropped = int((~complete).sum())
    kept = labels[complete]
    if kept.nunique() < len(groups):
        return None, n_dropped, "not tested: a group has no patient with complete covariates"
    design = cox.design_matrix(kept, groups, values[complete])
    status = testable(kept, event[complete], min_group_size, events_per_term * design.shape[1])
    if status != TESTED:
        return None, n_dropped, f"{status} for {design.shape[1]} Cox terms"
    try:
        fit = cox.fit_cox(time[complete], event[complete], design, alpha)
    except cox.ConvergenceError as error:
        return None, n_dropped, f"not tested: the Cox model did not converge ({str(error).splitlines()[0]})"
    return fit, n_dropped, TESTED


def untestable_outcome(grouping: pd.Series, clinical: pd.DataFrame, time_column: str, event_column: str) -> str | None:
    """Why `evaluate_survival` cannot describe this grouping's survival, in words, or None when it can.

    The patients with a known time and event must hold at least 2 groups and no group of a
    single patient. Bad outcome cells still raise InputError.
    """
    known = read_outcome(clinical, time_column, event_column).time.index
    return untestable(grouping, known, "with a known survival time and event")


def evaluate_survival(
    grouping: pd.Series,
    clinical: pd.DataFrame,
    time_column: str = "time",
    event_column: str = "event",
    covariates: tuple[str, ...] | list[str] = (),
    strata: str | None = None,
    rmst_horizon: float | None = None,
    n_permutations: int = 10_000,
    min_group_size: int = 5,
    min_events: int = 10,
    events_per_term: int = 10,
    alpha: float = 0.05,
    random_state=None,
    progress=None,
) -> Evaluation:
    """Kaplan-Meier curves, medians, log-rank (asymptotic, permutation, pairwise, stratified), Cox, RMST.

    `min_events` guards the log-rank tests; `events_per_term` (10 is common practice) guards the
    Cox model. `rmst_horizon` defaults to the shortest of the groups' longest follow-up times.
    """
    labelled = check_grouping(grouping)
    outcome = read_outcome(clinical, time_column, event_column)
    labels, _ = align(labelled, outcome.time.to_frame(), "clinical table")
    time, event = outcome.time.loc[labels.index], outcome.event.loc[labels.index]
    groups = group_order(labels)

    status = testable(labels, event, min_group_size, min_events)
    logrank = _overall_logrank(time, event, labels, status, n_permutations, random_state, progress)
    pairwise = _pairwise(time, event, labels, groups, min_group_size, min_events)
    stratified = _stratified(clinical, strata, time, event, labels, min_group_size, min_events)
    cox_fit, n_cox_dropped, cox_status = _cox(
        clinical, covariates, time, event, labels, groups, min_group_size, events_per_term, alpha
    )

    fitted = kaplan_meier.fit_curves(time, event, labels, groups, alpha)
    curves = kaplan_meier.curve_table(fitted)
    medians = kaplan_meier.median_table(fitted)
    ticks = kaplan_meier.nice_ticks(float(time.max()))
    at_risk = kaplan_meier.at_risk_at(time, labels, groups, ticks)
    horizon = kaplan_meier.default_horizon(time, labels) if rmst_horizon is None else float(rmst_horizon)
    per_group_rmst, rmst_differences = rmst.rmst_tables(time, event, labels, groups, horizon, alpha)

    cox_terms = cox_fit.terms if cox_fit else pd.DataFrame(columns=["term", "hazard_ratio", "ci_lower", "ci_upper", "p_value"])
    ph_check = cox_fit.ph_check if cox_fit else pd.DataFrame(columns=["term", "statistic", "p_value"])
    tables = {
        "logrank": pd.DataFrame([{"test": "log-rank", **logrank, "status": status}]),
        "pairwise": pairwise,
        "medians": medians,
        "cox": cox_terms,
        "ph_check": ph_check,
        "rmst": per_group_rmst,
        "rmst_differences": rmst_differences,
        "km": curves,
    }
    summary = {
        "groups": [str(g) for g in groups],
        "n_patients": len(labels),
        "n_events": int(event.sum()),
        "n_excluded": {
            "unlabelled": int(len(grouping) - len(labelled)),
            "missing_outcome": outcome.n_missing,
            "without_outcome_row": int(len(labelled) - len(labels)),
            "missing_covariates": n_cox_dropped,
        },
        "not_tested": None if status == TESTED else status,
        "logrank": {**logrank, "permutations": int(n_permutations)},
        "cox": cox_terms,
        "concordance": cox_fit.concordance if cox_fit else None,
        "ph_check": ph_check,
        "ph_global": cox_fit.ph_global if cox_fit else None,
        "ph_warning": cox_fit.ph_warning if cox_fit else None,
        "pairwise": pairwise,
        "stratified": stratified,
        "medians": medians,
        "rmst_horizon": horizon,
        "rmst": per_group_rmst,
        "rmst_differences": rmst_differences,
        "km": {
            "curves": [
                {"group": str(g), **{k: part[k] for k in ("time", "survival", "lower", "upper")}}
                for g, part in curves.groupby("group", sort=False)
            ],
            "at_risk_time": ticks,
            "at_risk": at_risk,
        },
        "status": {
            "logrank": status,
            "pairwise": TESTED if (pairwise["status"] == TESTED).any() else "not tested: no pair large enough",
            "stratified": stratified["status"] if stratified else "not requested",
            "cox": cox_status,
        },
    }
    return Evaluation(tables=tables, summary=plain(_with_text_groups(summary)))


def _with_text_groups(summary: dict) -> dict:
    """Group labels in the summary's tables written as text, as in the 'groups' list."""
    text = {}
    for key, value in summary.items():
        if isinstance(value, pd.DataFrame):
            value = value.copy()
            for column in ("group", "group_a", "group_b"):
                if column in value.columns:
                    value[column] = value[column].astype(str)
        elif isinstance(value, dict):
            value = _with_text_groups(value)
        text[key] = value
    return text
