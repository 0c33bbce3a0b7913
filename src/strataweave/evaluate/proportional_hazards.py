"""The proportional-hazards check of a fitted Cox model: one global Schoenfeld test, then each term.

The per-term tests are lifelines' `proportional_hazard_test` (scaled Schoenfeld residuals against
the rank of the event times). The global test combines the same correlations through the inverse
of the coefficients' covariance, as Grambsch & Therneau (1994) do, with one degree of freedom per
term: the warning rests on it alone, so a model with many terms is not flagged by chance in one
of them. The per-term p-values are not adjusted; they only point to the term behind a failure.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from lifelines import CoxPHFitter
from lifelines.statistics import TimeTransformers, proportional_hazard_test
from scipy import stats

TIME_TRANSFORM = "rank"


@dataclass(frozen=True)
class HazardsCheck:
    """Global test (statistic, df, p) and per-term tests (term, statistic, p_value) of a fitted model."""

    statistic: float
    df: int
    p_value: float
    terms: pd.DataFrame

    def global_row(self) -> dict:
        return {"statistic": self.statistic, "df": self.df, "p_value": self.p_value}


def check_proportional_hazards(model: CoxPHFitter, frame: pd.DataFrame, names: list[str]) -> HazardsCheck:
    """Test the fitted `model` (fitted on `frame`, columns renamed to `names` in the output)."""
    residuals = model.compute_residuals(frame, kind="scaled_schoenfeld")
    per_term = proportional_hazard_test(model, frame, time_transform=TIME_TRANSFORM,
                                        precomputed_residuals=residuals).summary
    events = model.event_observed.to_numpy().astype(bool)
    times = TimeTransformers().get(TIME_TRANSFORM)(model.durations, model.event_observed, model.weights)[events]
    centred = np.asarray(times, dtype=float) - np.mean(times)
    columns = list(model.params_.index)
    correlation = centred @ residuals[columns].to_numpy()
    covariance = model.variance_matrix_.loc[columns, columns].to_numpy()
    statistic = float(correlation @ np.linalg.solve(covariance, correlation) / (events.sum() * centred @ centred))
    terms = pd.DataFrame({"term": names, "statistic": per_term.loc[columns, "test_statistic"].to_numpy(),
                          "p_value": per_term.loc[columns, "p"].to_numpy()})
    return HazardsCheck(statistic, len(columns), float(stats.chi2.sf(statistic, len(columns))), terms)


def hazards_warning(check: HazardsCheck, alpha: float) -> str | None:
    """What a failed global test means and what to do about it, or None when it passes."""
    if check.p_value >= alpha:
        return None
    if check.df == 1:
        cause = f"one term, {check.terms['term'].iloc[0]}"
    else:
        pointer = check.terms.nsmallest(2, "p_value")
        named = " and ".join(f"{t} (p = {p:.2g})" for t, p in zip(pointer["term"], pointer["p_value"]))
        cause = (f"{check.df} terms; those that depart most are {named}, unadjusted p-values that only point to "
                 "the cause")
    return (
        f"The hazards do not look proportional over time (global Schoenfeld test p = {check.p_value:.2g}, {cause}). "
        "A hazard ratio is then an average over follow-up: read the Kaplan-Meier curves and the restricted "
        "mean survival times, which do not assume proportional hazards; where a covariate is the cause, stratify "
        "the analysis by it; where a subtype is, report its survival by time window rather than one hazard ratio."
    )
