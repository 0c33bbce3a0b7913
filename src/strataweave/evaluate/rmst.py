"""Restricted mean survival time (area under the Kaplan-Meier curve up to a horizon) and its variance.

Variance: sum over event times t_j <= horizon of A_j**2 d_j / (n_j (n_j - d_j)), where A_j is the
area under the curve from t_j to the horizon (the Greenwood-type estimator of Klein & Moeschberger,
Survival Analysis, section 4.5). lifelines' `restricted_mean_survival_time(return_variance=True)`
returns the spread of the restricted times themselves instead, not the estimator's variance.
"""

from __future__ import annotations

from itertools import combinations

import numpy as np
import pandas as pd
from scipy import stats


def rmst_with_variance(time: np.ndarray, event: np.ndarray, horizon: float) -> tuple[float, float]:
    """Restricted mean survival time up to `horizon` and the variance of that estimate."""
    distinct, inverse, counts = np.unique(time, return_inverse=True, return_counts=True)
    at_risk = time.size - np.cumsum(counts) + counts
    deaths = np.bincount(inverse, weights=event, minlength=distinct.size)
    survival = np.cumprod(1.0 - deaths / at_risk)
    inside = distinct < horizon
    starts = np.concatenate([[0.0], distinct[inside]])
    levels = np.concatenate([[1.0], survival[inside]])
    widths = np.diff(np.concatenate([starts, [horizon]]))
    pieces = levels * widths
    area_after = np.cumsum(pieces[::-1])[::-1][1:]  # area from each distinct time (inside) to the horizon
    n_inside, d_inside = at_risk[inside], deaths[inside]
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(d_inside > 0, area_after**2 * d_inside / (n_inside * (n_inside - d_inside)), 0.0)
    terms[~np.isfinite(terms)] = 0.0  # all remaining patients die: the area after is zero
    return float(pieces.sum()), float(terms.sum())


def rmst_tables(
    time: pd.Series, event: pd.Series, labels: pd.Series, groups: list, horizon: float, alpha: float = 0.05
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Restricted mean survival time per group at `horizon`, and every pairwise difference.

    Differences use a normal approximation with the groups' variances added (independent groups).
    """
    values = np.array(
        [rmst_with_variance(time[(labels == g).to_numpy()].to_numpy(), event[(labels == g).to_numpy()].to_numpy(), horizon) for g in groups]
    )
    means, variances = values[:, 0], values[:, 1]
    per_group = pd.DataFrame({"group": groups, "horizon": horizon, "rmst": means, "se": np.sqrt(variances)})
    pairs = list(combinations(range(len(groups)), 2))
    first = np.array([a for a, _ in pairs], dtype=int)
    second = np.array([b for _, b in pairs], dtype=int)
    difference = means[first] - means[second]
    se = np.sqrt(variances[first] + variances[second])
    z = stats.norm.ppf(1 - alpha / 2)
    with np.errstate(invalid="ignore", divide="ignore"):
        p_value = 2 * stats.norm.sf(np.abs(difference / se))
    differences = pd.DataFrame(
        {
            "group_a": [groups[i] for i in first],
            "group_b": [groups[i] for i in second],
            "horizon": horizon,
            "difference": difference,
            "ci_lower": difference - z * se,
            "ci_upper": difference + z * se,
            "p_value": p_value,
        }
    )
    return per_group, differences
