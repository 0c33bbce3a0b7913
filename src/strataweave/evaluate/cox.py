"""Cox proportional-hazards model of group plus covariates, with the proportional-hazards check."""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd
from lifelines import CoxPHFitter
from lifelines.exceptions import ConvergenceError

from strataweave.evaluate.proportional_hazards import check_proportional_hazards, hazards_warning

_TIME = "__time"
_EVENT = "__event"


@dataclass
class CoxFit:
    """Hazard ratio table, concordance, proportional-hazards check (global and per term) and its warning."""

    terms: pd.DataFrame
    concordance: float
    ph_check: pd.DataFrame
    ph_global: dict
    ph_warning: str | None
    n_used: int
    n_events: int


def design_matrix(labels: pd.Series, groups: list, covariates: pd.DataFrame) -> pd.DataFrame:
    """Indicator columns 'group X vs <first group>' plus covariates (text columns as indicators)."""
    reference = groups[0]
    columns = {f"group {g} vs {reference}": (labels == g).astype(float) for g in groups[1:]}
    for name in covariates.columns:
        values = covariates[name]
        if pd.api.types.is_numeric_dtype(values) and not pd.api.types.is_bool_dtype(values):
            columns[str(name)] = values.astype(float)
            continue
        levels = sorted(pd.unique(values.astype(str)))
        for level in levels[1:]:
            columns[f"{name} {level} vs {levels[0]}"] = (values.astype(str) == level).astype(float)
    return pd.DataFrame(columns, index=labels.index)


def fit_cox(time: pd.Series, event: pd.Series, design: pd.DataFrame, alpha: float = 0.05) -> CoxFit:
    """Fit lifelines' CoxPHFitter (Efron ties) and check proportional hazards (see proportional_hazards).

    Column names are replaced by neutral ones while fitting so that any term name is safe.
    Raises lifelines' ConvergenceError when the model cannot be fitted.
    """
    names = list(design.columns)
    neutral = [f"x{i}" for i in range(len(names))]
    frame = design.set_axis(neutral, axis=1).assign(**{_TIME: time.to_numpy(), _EVENT: event.to_numpy()})
    model = CoxPHFitter(alpha=alpha).fit(frame, duration_col=_TIME, event_col=_EVENT)
    summary = model.summary.loc[neutral]
    level = int(round((1 - alpha) * 100))
    terms = pd.DataFrame(
        {
            "term": names,
            "hazard_ratio": summary["exp(coef)"].to_numpy(),
            "ci_lower": summary[f"exp(coef) lower {level}%"].to_numpy(),
            "ci_upper": summary[f"exp(coef) upper {level}%"].to_numpy(),
            "p_value": summary["p"].to_numpy(),
        }
    )
    check = check_proportional_hazards(model, frame, names)
    return CoxFit(
        terms=terms,
        concordance=float(model.concordance_index_),
        ph_check=check.terms,
        ph_global=check.global_row(),
        ph_warning=hazards_warning(check, alpha),
        n_used=len(frame),
        n_events=int(event.sum()),
    )


__all__ = ["ConvergenceError", "CoxFit", "design_matrix", "fit_cox"]
