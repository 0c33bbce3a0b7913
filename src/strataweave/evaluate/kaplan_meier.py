"""Kaplan-Meier curves with confidence bands, numbers at risk and median survival (lifelines)."""

from __future__ import annotations

import numpy as np
import pandas as pd
from lifelines import KaplanMeierFitter
from lifelines.utils import median_survival_times
from matplotlib.ticker import MaxNLocator


def fit_curves(time: pd.Series, event: pd.Series, labels: pd.Series, groups: list, alpha: float = 0.05) -> dict:
    """One fitted lifelines KaplanMeierFitter per group (log-log confidence bands at 1 - alpha)."""
    fitted = {}
    for group in groups:
        members = (labels == group).to_numpy()
        fitted[group] = KaplanMeierFitter(alpha=alpha).fit(time[members], event[members], label=str(group))
    return fitted


def curve_table(fitted: dict) -> pd.DataFrame:
    """Tidy step-function table: group, time, survival, lower, upper, at_risk, events, censored."""
    parts = []
    for group, kmf in fitted.items():
        band = kmf.confidence_interval_survival_function_
        table = kmf.event_table
        parts.append(
            pd.DataFrame(
                {
                    "group": group,
                    "time": kmf.timeline,
                    "survival": kmf.survival_function_.iloc[:, 0].to_numpy(),
                    "lower": band.iloc[:, 0].to_numpy(),
                    "upper": band.iloc[:, 1].to_numpy(),
                    "at_risk": table["at_risk"].to_numpy(),
                    "events": table["observed"].to_numpy(),
                    "censored": table["censored"].to_numpy(),
                }
            )
        )
    return pd.concat(parts, ignore_index=True)


def nice_ticks(largest: float, target: int = 5) -> np.ndarray:
    """Round tick positions from 0 to `largest` with a 1, 2 or 5 times power-of-ten step (matplotlib)."""
    if largest <= 0:
        return np.array([0.0])
    ticks = MaxNLocator(nbins=target, steps=[1, 2, 5, 10]).tick_values(0.0, largest)
    return ticks[ticks <= largest + 1e-9 * (ticks[1] - ticks[0])]  # the locator's last tick may pass the end


def at_risk_at(time: pd.Series, labels: pd.Series, groups: list, ticks: np.ndarray) -> np.ndarray:
    """Numbers still at risk (follow-up time >= tick): groups x ticks integer matrix."""
    membership = labels.to_numpy()[None, :] == np.asarray(groups, dtype=object)[:, None]
    still_followed = time.to_numpy()[:, None] >= ticks[None, :]
    return membership.astype(np.int64) @ still_followed.astype(np.int64)


def median_table(fitted: dict) -> pd.DataFrame:
    """Median survival per group with its confidence interval; infinity means not reached."""
    rows = []
    for group, kmf in fitted.items():
        interval = median_survival_times(kmf.confidence_interval_survival_function_)
        rows.append(
            {
                "group": group,
                "n": int(kmf.event_table["at_risk"].iloc[0]),
                "events": int(kmf.event_table["observed"].sum()),
                "median": float(kmf.median_survival_time_),
                "ci_lower": float(interval.iloc[0, 0]),
                "ci_upper": float(interval.iloc[0, 1]),
            }
        )
    return pd.DataFrame(rows)


def default_horizon(time: pd.Series, labels: pd.Series) -> float:
    """The shortest of the groups' longest follow-up times, so every curve is defined up to it.

    common practice for choosing a restricted mean survival horizon.
    """
    return float(time.groupby(labels.to_numpy()).max().min())
