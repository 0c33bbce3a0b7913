"""`strataweave check`: validate a workflow, read and prepare its inputs, print QC; no graph, no model."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from strataweave.workflow.config import load_workflow
from strataweave.workflow.loading import check_columns, load_inputs
from strataweave.workflow.preparing import prepare_cohort


def _qc_table(prepared: dict) -> pd.DataFrame:
    """One row per modality: patients, features in the file, after each filter, used; missing share."""
    rows = []
    for row in prepared["qc"]:
        filters = {f"after_{step['step']}": step["features_after"] for step in row["filters"]}
        rows.append(
            {"modality": row["name"], "kind": row["kind"], "patients": row["patients"],
             "not_in_clinical": prepared["dropped"][row["name"]], "features_in_file": row["features_in_file"],
             **filters, "features_used": row["features_used"], "missing_fraction": round(row["missing_fraction"], 4)}
        )
    return pd.DataFrame(rows).set_index("modality")


def _presence_patterns(presence: pd.DataFrame) -> pd.DataFrame:
    """Patients per combination of modalities, the most complete first."""
    counts = presence.value_counts(sort=False).rename("patients").reset_index()
    counts.insert(0, "modalities", counts[list(presence.columns)].sum(axis=1))
    return counts.sort_values(["modalities", "patients"], ascending=False, kind="stable").reset_index(drop=True)


def check_inputs(path: str | Path) -> str:
    """The report `strataweave check` prints: a summary line, then QC tables of the prepared inputs."""
    flow = load_workflow(path, require_modalities=False)
    loaded = load_inputs(flow)
    clinical = loaded["clinical"]
    check_columns(flow, clinical)
    survival = f"survival: {flow.cohort.time_column}/{flow.cohort.event_column}" if flow.has_survival else "no survival"
    lines = [
        f"{flow.source.name}: valid; {len(clinical)} patients in {flow.cohort.clinical.name}, "
        f"{len(flow.modalities)} modalities, {survival}, subtype counts {list(flow.subtypes.counts)}"
    ]
    if flow.modalities:
        prepared = prepare_cohort(flow, loaded)
        lines += [
            f"patients in the analysis (clinical and at least one modality): {len(prepared['patients'])}",
            "", _qc_table(prepared).to_string(), "", _presence_patterns(prepared["presence"]).to_string(index=False),
        ]
    return "\n".join(lines)
