"""The prepare stage: each modality normalised, filtered, imputed and made non-negative, with QC.

Patients in the analysis are those of the clinical table measured on at least one
modality, in the clinical table's order. Each modality keeps only its measured patients;
`aligned_views` puts them on the common patient index (all-NaN rows where a modality is
missing), which is how the factorisation is told about a missing modality. The patient
graph and the marker tests read `normalised_views` instead: the same data before the
non-negativity step.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from strataweave.data.preprocess import Preprocessor
from strataweave.errors import InputError
from strataweave.workflow.config import Workflow

FILTER_STEPS = ("missing_filter", "variance_filter", "top_features")


def _qc_row(name: str, kind: str, raw: pd.DataFrame, measured: pd.DataFrame, fitted: Preprocessor) -> dict:
    return {
        "name": name,
        "kind": kind,
        "patients": int(measured.shape[0]),
        "features_in_file": int(raw.shape[1]),
        "filters": [
            {"step": step["step"], "features_after": int(step["features_out"])}
            for step in fitted.steps_
            if step["step"] in FILTER_STEPS
        ],
        "features_used": int(len(fitted.output_features_)),
        "missing_fraction": float(measured.isna().to_numpy().mean()) if measured.size else 0.0,
    }


def prepare_cohort(flow: Workflow, loaded: dict) -> dict:
    """Fitted preprocessing of every modality; what the later stages and `assign` need."""
    clinical, raw = loaded["clinical"], loaded["raw"]
    measured_anywhere = pd.Index([]).append([frame.index for frame in raw.values()]) if raw else pd.Index([])
    patients = clinical.index[clinical.index.isin(measured_anywhere)] if raw else clinical.index
    views, unsplit, preprocessors, qc = {}, {}, {}, []
    for modality in flow.modalities:
        frame = raw[modality.name]
        measured = frame.loc[frame.index.isin(patients)]
        if measured.empty:
            raise InputError(
                f"{modality.path.name} (modality {modality.name!r}): found no patient of "
                f"{flow.cohort.clinical.name}, expected patient IDs shared with the clinical table"
            )
        source = f"{modality.path.name} (modality {modality.name!r})"
        fitted = Preprocessor(**modality.preprocessing()).fit(measured, source=source)
        views[modality.name] = fitted.transform(measured, source=source)
        if modality.non_negative == "split":
            unsplit[modality.name] = _unsplit_view(modality, measured, source)
        state, arrays = fitted.to_state()
        preprocessors[modality.name] = {"state": state, "arrays": arrays}
        qc.append(_qc_row(modality.name, modality.kind, frame, measured, fitted))
    presence = pd.DataFrame(
        {name: patients.isin(view.index) for name, view in views.items()}, index=patients, dtype=bool
    )
    return {
        "patients": patients,
        "views": views,
        "unsplit_views": unsplit,
        "preprocessors": preprocessors,
        "presence": presence,
        "qc": qc,
        "dropped": {name: int((~frame.index.isin(patients)).sum()) for name, frame in raw.items()},
    }


def _unsplit_view(modality, measured: pd.DataFrame, source: str) -> pd.DataFrame:
    """The same preprocessing without the sign split: one column per feature."""
    options = {**modality.preprocessing(), "non_negative": "none"}
    return Preprocessor(**options).fit_transform(measured, source=source)


def normalised_views(prepared: dict) -> dict[str, pd.DataFrame]:
    """Each modality on its normalised scale, one column per feature: for patient distances and markers.

    A shift keeps both distances and feature names, so the model's view serves; a sign split
    keeps neither, so its modality was also prepared without the split.
    """
    return {name: prepared["unsplit_views"].get(name, view) for name, view in prepared["views"].items()}


def aligned_views(prepared: dict) -> list[pd.DataFrame]:
    """Every modality on the analysis patients, all-NaN rows where a patient lacks it."""
    patients = prepared["patients"]
    return [view.reindex(patients) for view in prepared["views"].values()]


def presence_array(prepared: dict) -> np.ndarray:
    """patients x modalities booleans in workflow order."""
    return prepared["presence"].to_numpy(dtype=bool)
