"""What a sweep of subtype counts returns, its JSON-ready form for results.json, and its saved state."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from strataweave.codec import decode, encode, prefixed, unprefixed
from strataweave.factorize import JointNMF
from strataweave.subtypes.baselines import BASELINE_METHODS
from strataweave.subtypes.recommend import Recommendation, recommend_count
from strataweave.subtypes.settings import SweepSettings

#: Direction of each criterion for plots: True higher is better, False lower, None neither.
HIGHER_IS_BETTER = {
    "pac": False,
    "cophenetic": True,
    "silhouette": True,
    "eigengap": True,
    "reconstruction_error": None,  # falls with every added component: read its elbow, not its size
    "smallest_subtype": None,
    "stability": True,
    "modularity": True,
}


def json_number(value) -> float | int | None:
    """A JSON-safe number: NaN and infinities become None, numpy scalars plain Python."""
    if value is None:
        return None
    if isinstance(value, (int, np.integer)) and not isinstance(value, bool):
        return int(value)
    value = float(value)
    return value if math.isfinite(value) else None


def subtype_names(count: int) -> list[str]:
    """Display names of subtype codes 0..count-1."""
    return [f"S{code + 1}" for code in range(count)]


def subtype_labels(codes: pd.Series, count: int) -> pd.Series:
    """Subtype names (S1, S2, ...) of integer codes, on the same patient index."""
    names = np.asarray(subtype_names(count), dtype=object)
    return pd.Series(names[codes.to_numpy()], index=codes.index, name="subtype")


def named_assignments(assignments: pd.DataFrame) -> pd.DataFrame:
    """A sweep's assignments at one count with subtype names and score_<name> columns."""
    count = sum(1 for column in assignments.columns if str(column).startswith("score_"))
    names = subtype_names(count)
    renamed = assignments.rename(columns={f"score_{j}": f"score_{name}" for j, name in enumerate(names)})
    return renamed.assign(subtype=subtype_labels(assignments["subtype"], count))


#: The fields of a SweepResult that `to_state` stores through the codec (pandas and numpy objects).
CODEC_FIELDS = ("patients", "criteria", "consensus", "consensus_patients", "assignments", "resample_labels",
                "baseline_labels", "baselines", "partitions", "flow")


@dataclass(frozen=True)
class SweepResult:
    """Everything the sweep found, keyed by subtype count.

    criteria: one row per count, one column per criterion (see HIGHER_IS_BETTER).
    consensus: count -> float32 consensus matrix among the patients at `consensus_patients`
    (NaN for pairs never drawn together): all N patients up to `consensus.KEPT_SIDE`, above
    that a seeded sample; PAC and core flags always cover every pair.
    consensus_patients: positions (into `patients`) of the consensus matrices' rows and columns.
    assignments: count -> patients x [subtype, confidence, own_consensus, core, score_0..]
    from the full-data fit; confidence is the labeller's margin in [0, 1], own_consensus the
    patient's mean consensus with its subtype, core whether that exceeds core_threshold.
    resample_labels: count -> resamples x N labels (-1 = not drawn).
    baseline_labels: count -> patients x baseline method labels.
    baselines: one row per (count, method): ARI and NMI against the joint subtypes,
    silhouette on the fused graph embedding, smallest subtype.
    partitions: one row per count: the candidate partition taken (`source`, see
    `partitions.PARTITION_SOURCES`) and every candidate's agreement (`partitions.choose_partition`).
    flow: how subtypes split from each count to the next one swept.
    models: count -> the full-data JointNMF. unconverged: fits that stopped at max_iter.
    """

    patients: pd.Index
    counts: list[int]
    criteria: pd.DataFrame
    consensus: dict[int, np.ndarray]
    consensus_patients: np.ndarray
    assignments: dict[int, pd.DataFrame]
    resample_labels: dict[int, np.ndarray]
    baseline_labels: dict[int, pd.DataFrame]
    baselines: pd.DataFrame
    partitions: pd.DataFrame
    flow: pd.DataFrame
    models: dict[int, JointNMF]
    recommendation: Recommendation
    settings: SweepSettings
    unconverged: int

    @property
    def count(self) -> int:
        """The chosen subtype count (the rule's, or the user's)."""
        return self.recommendation.count

    @property
    def labels(self) -> pd.Series:
        """Final subtype codes at the chosen count, indexed by patient."""
        return self.assignments[self.count]["subtype"]

    def with_user_count(self, count: int | None) -> "SweepResult":
        """The same sweep with the count fixed by the user (None: back to the rule)."""
        settings = replace(self.settings, user_count=count)
        choice = recommend_count(
            self.criteria, min_size=settings.min_size, pac_tolerance=settings.pac_tolerance, user_count=count
        )
        return replace(self, settings=settings, recommendation=choice)

    def to_state(self) -> tuple[dict, dict[str, np.ndarray]]:
        """(JSON-safe dict, arrays for .npz) from which `from_state` rebuilds the sweep: the tables through the
        codec, each count's JointNMF by its own `to_state` plus its patient factor (arrays `model<k>_...`)."""
        tables, arrays = encode({name: getattr(self, name) for name in CODEC_FIELDS})
        models = {}
        for k, model in self.models.items():
            models[str(k)], parts = model.to_state()
            arrays.update(prefixed(f"model{k}_", {**parts, "patient_factor": model.patient_factor_}))
        state = {
            "tables": tables,
            "counts": [int(k) for k in self.counts],
            "models": models,
            "recommendation": self.recommendation.to_dict(),
            "settings": self.settings.to_dict(),
            "unconverged": int(self.unconverged),
        }
        return state, arrays

    @classmethod
    def from_state(cls, state: dict, arrays) -> "SweepResult":
        """The sweep that `to_state` saved (arrays as loaded with allow_pickle=False)."""
        models = {}
        for key, model_state in state["models"].items():
            parts = unprefixed(f"model{key}_", arrays)
            models[int(key)] = JointNMF.from_state(model_state, parts)
            models[int(key)].patient_factor_ = parts["patient_factor"]
        return cls(
            **decode(state["tables"], arrays),
            counts=list(state["counts"]),
            models=models,
            recommendation=Recommendation(**state["recommendation"]),
            settings=SweepSettings(**state["settings"]),
            unconverged=int(state["unconverged"]),
        )

    def to_dict(self) -> dict:
        """results.json sections: subtype_count, selection, subtypes, baselines (NaN as None)."""
        final = self.assignments[self.count]
        sizes = np.bincount(final["subtype"].to_numpy(), minlength=self.count)
        at_final = self.baselines[self.baselines["count"] == self.count]
        return {
            "subtype_count": int(self.count),
            "selection": {
                "counts": [int(k) for k in self.counts],
                "criteria": {
                    name: [json_number(v) for v in self.criteria[name]] for name in self.criteria.columns
                },
                "higher_is_better": {name: HIGHER_IS_BETTER.get(name) for name in self.criteria.columns},
                "recommended": int(self.recommendation.rule_count),
                "reason": self.recommendation.reason,
                "overridden": self.recommendation.chosen_by == "user",
                "rule": self.recommendation.rule,
                "flow": [
                    {key: json_number(row[key]) for key in ("count", "source", "target", "patients")}
                    for row in self.flow.to_dict("records")
                ],
                "partitions": [
                    {"count": int(k), **{key: json_number(v) if key != "source" else v for key, v in row.items()}}
                    for k, row in self.partitions.to_dict("index").items()
                ],
                "settings": self.settings.to_dict(),
                "unconverged_fits": int(self.unconverged),
                "consensus_patients": int(self.consensus_patients.size),
            },
            "subtypes": {
                "labels": subtype_names(self.count),
                "sizes": [int(s) for s in sizes],
                "core_threshold": float(self.settings.core_threshold),
                "core_patients": int(final["core"].sum()),
            },
            "baselines": [
                {
                    "method": BASELINE_METHODS[row["method"]],
                    "ari": json_number(row["ari"]),
                    "nmi": json_number(row["nmi"]),
                    "silhouette": json_number(row["silhouette"]),
                    "smallest_subtype": json_number(row["smallest_subtype"]),
                }
                for row in at_final.to_dict("records")
            ],
        }
