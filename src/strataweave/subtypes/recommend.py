"""The rule that turns the criteria table into one recommended subtype count, with its reason."""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
import pandas as pd

from strataweave.errors import InputError

RULE = (
    "Only counts whose smallest subtype has at least min_size patients are eligible. Among "
    "them, the counts whose PAC lies within pac_tolerance of the lowest eligible PAC are "
    "equally crisp, and the largest of these is chosen: resamples keep splitting the patients "
    "the same way at that finer count, which noise does not do. A count chosen by the user "
    "replaces the rule's choice but must also be eligible. Where another eligible count has "
    "partitions that fit the fused graph better (higher modularity), the reason names it as "
    "the runner-up, so that both can be examined."
)
# Why the largest of the equally crisp counts: merging two real subtypes is often just as
# consistent across resamples as keeping them apart (PAC near 0 for both counts), while
# splitting one homogeneous group is not (its patients change sides between resamples and
# PAC rises). A crisp finer partition is therefore evidence of structure; min_size keeps
# the rule from rewarding a tiny split-off group.


@dataclass(frozen=True)
class Recommendation:
    """The chosen count, who chose it, the rule's own choice and one sentence of reason."""

    count: int
    chosen_by: str
    rule_count: int
    reason: str
    rule: str = RULE

    def to_dict(self) -> dict:
        return asdict(self)


def _eligible(criteria: pd.DataFrame, min_size: int) -> pd.DataFrame:
    eligible = criteria[criteria["smallest_subtype"] >= min_size]
    if eligible.empty:
        sizes = ", ".join(f"{k}: {int(s)}" for k, s in criteria["smallest_subtype"].items())
        raise InputError(
            f"min_size: found smallest subtypes ({sizes}) all below min_size={min_size}; "
            "expected at least one count whose smallest subtype reaches it (lower min_size or the counts)"
        )
    return eligible


def rule_choice(criteria: pd.DataFrame, min_size: int, pac_tolerance: float) -> tuple[int, str]:
    """The count the rule picks and the reason sentence (see RULE), which does not repeat the count."""
    eligible = _eligible(criteria, min_size)
    pac = eligible["pac"].fillna(np.inf)
    best_pac = float(pac.min())
    near = eligible[pac <= best_pac + pac_tolerance]
    count = int(near.index.max())
    row = criteria.loc[count]
    if len(near) == 1:
        reason = (
            f"It has the lowest PAC ({row['pac']:.3f}) among counts whose smallest "
            f"subtype has at least {min_size} patients."
        )
    else:
        others = ", ".join(str(int(k)) for k in near.index if k != count)
        reason = (
            f"It is the largest count whose PAC ({row['pac']:.3f}) is within "
            f"{pac_tolerance:g} of the lowest ({best_pac:.3f}) among counts whose smallest subtype "
            f"has at least {min_size} patients (equally crisp: {others})."
        )
    return count, reason + _runner_up(eligible, count)


def _runner_up(eligible: pd.DataFrame, count: int) -> str:
    """A sentence naming the eligible count of highest modularity, where it is not `count`."""
    if "modularity" not in eligible or eligible["modularity"].isna().all():
        return ""
    best = int(eligible["modularity"].idxmax())
    if best == count:
        return ""
    return (f" Runner-up: {best} subtypes, whose partition fits the fused graph better (modularity "
            f"{eligible.loc[best, 'modularity']:.3f} against {eligible.loc[count, 'modularity']:.3f}, "
            f"PAC {eligible.loc[best, 'pac']:.3f}).")


def recommend_count(
    criteria: pd.DataFrame,
    *,
    min_size: int,
    pac_tolerance: float = 0.01,
    user_count: int | None = None,
) -> Recommendation:
    """Apply RULE to a criteria table indexed by count (columns pac and smallest_subtype)."""
    if pac_tolerance < 0:
        raise InputError(f"pac_tolerance: found {pac_tolerance}; expected a number >= 0")
    count, reason = rule_choice(criteria, min_size, pac_tolerance)
    if user_count is None:
        return Recommendation(count=count, chosen_by="rule", rule_count=count, reason=reason)
    if user_count not in criteria.index:
        raise InputError(
            f"subtype count: found {user_count}; expected one of the counts swept "
            f"({', '.join(str(int(k)) for k in criteria.index)})"
        )
    smallest = int(criteria.loc[user_count, "smallest_subtype"])
    if smallest < min_size:
        raise InputError(
            f"subtype count: found {user_count}, whose smallest subtype has {smallest} patients; "
            f"expected a count whose smallest subtype has at least min_size={min_size}"
        )
    user_reason = f"Chosen by the user; the rule would choose {count}. {reason}"
    return Recommendation(count=int(user_count), chosen_by="user", rule_count=count, reason=user_reason)
