"""`strataweave check`: validate a workflow, read and prepare its inputs, print QC; no graph, no model."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from strataweave.data.cohort import Cohort
from strataweave.data.qc import presence_patterns, qc_summary
from strataweave.workflow.config import load_workflow
from strataweave.workflow.evaluating import check_gene_sets
from strataweave.workflow.loading import check_columns, load_inputs
from strataweave.workflow.preparing import build_cohort

#: Left-out patients listed one by one in the check report; beyond this, only the count.
UNMATCHED_SHOWN = 20


def _qc_table(cohort: Cohort) -> pd.DataFrame:
    """One row per modality: patients, left out, features in the file, after each filter, used; missing share."""
    table = qc_summary(cohort).drop(columns="source")
    return table.assign(missing_fraction=table["missing_fraction"].round(4))


def _unmatched_lines(unmatched: pd.DataFrame) -> list[str]:
    """The modality patients left out of the analysis (not merged), with the reason of each."""
    if unmatched.empty:
        return []
    lines = ["", f"modality patients left out of the analysis (not merged): {len(unmatched)}",
             unmatched.head(UNMATCHED_SHOWN).to_string(index=False)]
    if len(unmatched) > UNMATCHED_SHOWN:
        lines.append(f"... and {len(unmatched) - UNMATCHED_SHOWN} more")
    return lines


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
        cohort = build_cohort(flow, loaded)
        check_gene_sets(flow, cohort.normalised_views())
        lines += [
            f"patients in the analysis (clinical and at least one modality): {len(cohort.patients)}",
            "", _qc_table(cohort).to_string(), "", presence_patterns(cohort).to_string(index=False),
            *_unmatched_lines(cohort.unmatched),
        ]
    return "\n".join(lines)
