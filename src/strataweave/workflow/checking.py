"""`strataweave check`: validate a workflow and read its inputs, summarise, compute nothing heavy."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from strataweave.workflow.config import load_workflow
from strataweave.workflow.loading import check_columns, load_inputs


def check_inputs(path: str | Path) -> tuple[str, pd.DataFrame]:
    """A one-line summary of the workflow and a per-modality QC table of its inputs."""
    flow = load_workflow(path, require_modalities=False)
    loaded = load_inputs(flow)
    clinical, raw = loaded["clinical"], loaded["raw"]
    check_columns(flow, clinical)
    rows = []
    for modality in flow.modalities:
        frame = raw[modality.name]
        shared = frame.index.intersection(clinical.index)
        rows.append(
            {
                "modality": modality.name,
                "kind": modality.kind,
                "patients_in_file": frame.shape[0],
                "patients_in_clinical": len(shared),
                "features": frame.shape[1],
                "missing_fraction": float(frame.isna().to_numpy().mean()) if frame.size else 0.0,
            }
        )
    qc = pd.DataFrame(rows, columns=["modality", "kind", "patients_in_file", "patients_in_clinical", "features",
                                     "missing_fraction"]).set_index("modality")
    survival = f"survival: {flow.cohort.time_column}/{flow.cohort.event_column}" if flow.has_survival else "no survival"
    summary = (
        f"{flow.source.name}: valid; {len(clinical)} patients in {flow.cohort.clinical.name}, "
        f"{len(flow.modalities)} modalities, {survival}, subtype counts {list(flow.subtypes.counts)}"
    )
    return summary, qc
