"""The prepare stage: the data layer's Cohort of the workflow's modalities, kept as plain tables.

Each modality is normalised, filtered, imputed and made non-negative by
`strataweave.data.prepare_modality`, fitted on the patients of the clinical table; the
`Cohort` then chooses the analysis patients (clinical IDs measured on at least one
modality, in clinical order), the presence table, the aligned views (all-NaN rows where a
modality is missing, which is how the factorisation is told about a missing modality) and
the table of modality patients left out (absent from the clinical table, or differing from
a clinical ID only in case: reported, never merged). The stage result holds these as
pandas objects so that the stage cache stays JSON + npz. The patient graph and the marker
tests read `normalised_views` instead: the same data before the sign split.
"""

from __future__ import annotations

import pandas as pd

from strataweave.data.assembly import cohort_from_tables
from strataweave.data.cohort import Cohort
from strataweave.data.qc import applied_filters, qc_summary
from strataweave.workflow.config import Workflow

#: Version of the prepare stage's result: part of its cache key, so that a run folder
#: cached by an older layout is prepared again rather than read with missing entries.
RESULT_LAYOUT = 3


def build_cohort(flow: Workflow, loaded: dict) -> Cohort:
    """The workflow's modalities prepared and aligned on the clinical table."""
    modalities = {}
    for modality in flow.modalities:
        options = {key: value for key, value in modality.preprocessing().items() if key != "kind"}
        modalities[modality.name] = (loaded["raw"][modality.name], modality.kind, options)
    return cohort_from_tables(loaded["clinical"], modalities, sources={m.name: m.path.name for m in flow.modalities})


def qc_rows(cohort: Cohort) -> list[dict]:
    """One results.json row per modality: patients, features in the file, after each filter, used."""
    summary = qc_summary(cohort)
    return [
        {
            "name": modality.name,
            "kind": modality.kind,
            "patients": int(summary.at[modality.name, "patients"]),
            "features_in_file": int(summary.at[modality.name, "features_input"]),
            "filters": [{"step": step, "features_after": count} for step, count in applied_filters(modality)],
            "features_used": int(summary.at[modality.name, "features_used"]),
            "missing_fraction": float(summary.at[modality.name, "missing_fraction"]),
        }
        for modality in cohort.modalities
    ]


def prepare_cohort(flow: Workflow, loaded: dict) -> dict:
    """The prepare stage's result: what the later stages and `assign` need, from the Cohort."""
    cohort = build_cohort(flow, loaded)
    unmatched = cohort.unmatched["modality"].value_counts()
    preprocessors = {}
    for modality in cohort.modalities:
        state, arrays = modality.preprocessor.to_state()
        preprocessors[modality.name] = {"state": state, "arrays": arrays}
    return {
        "patients": cohort.patients,
        "views": {m.name: m.data for m in cohort.modalities},
        "aligned_views": cohort.aligned_views(),
        "normalised_views": cohort.normalised_views(),
        "preprocessors": preprocessors,
        "presence": cohort.presence,
        "qc": qc_rows(cohort),
        "unmatched": cohort.unmatched,
        "dropped": {name: int(unmatched.get(name, 0)) for name in cohort.names},
    }


def normalised_views(prepared: dict) -> dict[str, pd.DataFrame]:
    """Each modality on its normalised scale, one column per feature: for patient graphs and markers
    (Cohort.normalised_views)."""
    return prepared["normalised_views"]


def aligned_views(prepared: dict) -> list[pd.DataFrame]:
    """Every modality on the analysis patients, all-NaN rows where a patient lacks it (Cohort.aligned_views)."""
    return prepared["aligned_views"]

