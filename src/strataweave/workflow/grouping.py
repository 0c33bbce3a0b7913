"""The grouping a run reports: our subtypes (run) or the user's groups (evaluate), on one patient order."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from strataweave.errors import InputError
from strataweave.evaluate.grouping import group_order


@dataclass(frozen=True)
class ReportedGrouping:
    """Patients in analysis order; group names (position = code); per-patient code, confidence, core."""

    patients: pd.Index
    names: list[str]
    codes: np.ndarray
    confidence: np.ndarray
    core: np.ndarray
    scores: pd.DataFrame | None

    @property
    def labels(self) -> pd.Series:
        return pd.Series(np.asarray(self.names, dtype=object)[self.codes], index=self.patients, name="subtype")

    @property
    def sizes(self) -> list[int]:
        return [int(n) for n in np.bincount(self.codes, minlength=len(self.names))]


def subtype_grouping(fitted: dict) -> ReportedGrouping:
    """The final subtypes of a run, with the labeller's confidence and scores."""
    assignments = fitted["assignments"]
    names = list(fitted["names"])
    scores = assignments[[f"score_{j}" for j in range(len(names))]].copy()
    scores.columns = [f"score_{name}" for name in names]
    return ReportedGrouping(
        patients=assignments.index,
        names=names,
        codes=assignments["subtype"].to_numpy(dtype=np.int64),
        confidence=assignments["confidence"].to_numpy(dtype=np.float64),
        core=assignments["core"].to_numpy(dtype=bool),
        scores=scores,
    )


def analysis_patients(loaded: dict, prepared: dict | None) -> pd.Index:
    """Clinical patients measured on at least one modality (all clinical patients without modalities)."""
    return prepared["patients"] if prepared is not None else loaded["clinical"].index


def given_grouping(groups: pd.Series, patients: pd.Index) -> ReportedGrouping:
    """A grouping the user brought, on the analysis patients it labels (confidence 1, all core)."""
    labelled = groups.reindex(patients).dropna()
    if labelled.nunique() < 2:
        raise InputError(
            f"--groups: found {labelled.nunique()} group(s) among the {len(patients)} analysis patients "
            f"({len(labelled)} of the file's {len(groups)} patients are among them); expected at least 2 groups"
        )
    names = [str(name) for name in group_order(labelled)]
    codes = pd.Categorical(labelled.astype(str), categories=names).codes.astype(np.int64)
    n = len(labelled)
    return ReportedGrouping(labelled.index, names, codes, np.ones(n), np.ones(n, dtype=bool), None)



def left_out_patients(groups: pd.Series, patients: pd.Index) -> pd.DataFrame:
    """Patients a given grouping leaves out of the evaluation, with why: patient_id, reason."""
    no_group = patients.difference(groups.index, sort=False)
    not_analysed = groups.index.difference(patients, sort=False)
    return pd.DataFrame({
        "patient_id": [*no_group, *not_analysed],
        "reason": ["no group in the --groups file (absent or empty)"] * len(no_group)
        + ["not an analysis patient (no clinical row, or no modality measured)"] * len(not_analysed),
    })
