"""Choosing the fusion rule from the data: the fused graph that the modalities themselves confirm most.

With many modalities of uneven quality, the intersection (every shared modality must
agree) is set by the weakest one, and a modality blind to some contrasts makes patients of
the subtypes it merges look alike; the average lets one noisy modality add edges of its own.
A quorum sits between them. Each candidate (intersection, every quorum from n - 1 down
to 1, then the average) is built and scored by its confirmed share: for each modality, the
share of the fused graph's edge weight that falls on pairs among that modality's own k
nearest neighbours, averaged over the modalities. The candidate with the highest confirmed
share wins; on a tie the stricter rule (listed first) is kept.
"""

from __future__ import annotations

import numpy as np
import pandas as pd


def rule_candidates(n_modalities: int) -> list[tuple[str, int | None]]:
    """(rule, quorum) from the strictest to the loosest: intersection, quorum n-1 .. 1, average."""
    quorums = [("quorum", q) for q in range(n_modalities - 1, 0, -1)]
    return [("intersection", None), *quorums, *([("average", None)] if n_modalities > 1 else [])]


def confirmed_shares(weights: np.ndarray, confirmed: np.ndarray) -> np.ndarray:
    """Per modality, the share of the total edge weight on pairs it confirms (pairs x modalities mask)."""
    total = weights.sum()
    if total <= 0:
        return np.zeros(confirmed.shape[1])
    return weights @ confirmed / total


def choose_rule(candidates: list[tuple[str, int | None]], build, confirmed: np.ndarray, names: list[str]):
    """The winning (rule, quorum), its built graph and the evidence table of every candidate.

    `build(rule, quorum)` returns (edge weights per candidate pair, fallback patient mask).
    """
    rows, best, best_graph = [], -1, None
    for position, (rule, quorum) in enumerate(candidates):
        weights, fallback = build(rule, quorum)
        shares = confirmed_shares(weights, confirmed)
        if best < 0 or shares.mean() > rows[best]["confirmed_share"]:  # a tie keeps the stricter rule
            best, best_graph = position, (weights, fallback)
        rows.append({"rule": rule, "quorum": quorum, "confirmed_share": float(shares.mean()),
                     **{f"confirmed_by_{name}": float(s) for name, s in zip(names, shares)},
                     "fallback_patients": int(fallback.sum())})
    evidence = pd.DataFrame(rows)
    evidence["quorum"] = pd.Series([quorum for _, quorum in candidates], dtype=object)  # None or a whole number
    evidence["chosen"] = np.arange(len(rows)) == best
    rule, quorum = candidates[best]
    return rule, quorum, best_graph, evidence
