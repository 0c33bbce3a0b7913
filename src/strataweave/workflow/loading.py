"""The load stage: read the clinical table and every modality file, and check the columns named."""

from __future__ import annotations

import pandas as pd

from strataweave.data.readers import read_clinical, read_matrix
from strataweave.errors import InputError
from strataweave.evaluate.outcome import read_outcome
from strataweave.workflow.config import Workflow


def check_columns(flow: Workflow, clinical: pd.DataFrame) -> None:
    """Every clinical column the workflow names must be in the clinical table, and the survival
    columns must hold times and 0/1 events, so a bad cell stops the run before the sweep."""
    named = {
        "cohort.time_column": [flow.cohort.time_column],
        "cohort.event_column": [flow.cohort.event_column],
        "evaluation.covariates": list(flow.evaluation.covariates),
        "evaluation.strata": [flow.evaluation.strata],
        "evaluation.clinical_columns": list(flow.evaluation.clinical_columns or ()),
        "evaluation.categorical_columns": list(flow.evaluation.categorical_columns),
    }
    for key, columns in named.items():
        for column in columns:
            if column is not None and column not in clinical.columns:
                raise InputError(
                    f"{flow.source.name}: key '{key}': found column {column!r}, expected a column of "
                    f"{flow.cohort.clinical.name} ({', '.join(map(str, clinical.columns[:8]))})"
                )
    if flow.has_survival:
        try:
            read_outcome(clinical, flow.cohort.time_column, flow.cohort.event_column)
        except InputError as problem:
            raise InputError(f"{flow.cohort.clinical}: {problem}") from None


def load_inputs(flow: Workflow) -> dict:
    """Clinical table and raw matrices (patients x features), validated by the data layer."""
    clinical = read_clinical(flow.cohort.clinical, flow.cohort.id_column)
    raw = {
        m.name: read_matrix(m.path, orientation=m.orientation, known_ids=clinical.index, name=m.name, kind=m.kind)
        for m in flow.modalities
    }
    return {"clinical": clinical, "raw": raw}
