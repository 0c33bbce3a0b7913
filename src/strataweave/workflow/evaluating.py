"""The evaluate stage: survival, clinical association, markers and enrichment of one grouping.

Works on our subtypes and equally on a grouping the user brings; a part whose inputs are
absent (no survival columns, no modalities, no gene-set file) is left out.
"""

from __future__ import annotations

import pandas as pd

from strataweave.evaluate.clinical import associate_clinical
from strataweave.evaluate.enrichment import enrich_markers
from strataweave.evaluate.gene_sets import read_gene_set_lines, read_gene_set_table
from strataweave.evaluate.markers import markers_by_modality
from strataweave.evaluate.survival import evaluate_survival
from strataweave.seeding import child_seeds
from strataweave.workflow.config import Workflow
from strataweave.workflow.preparing import normalised_views
from strataweave.workflow.progress import Feedback


def clinical_variables(flow: Workflow, clinical: pd.DataFrame) -> list[str]:
    """Every clinical column except the survival time and event."""
    outcome = {flow.cohort.time_column, flow.cohort.event_column}
    return [column for column in clinical.columns if column not in outcome]


def _as_record(evaluation) -> dict:
    return {"tables": evaluation.tables, "summary": evaluation.summary}


def evaluate_grouping(
    flow: Workflow, clinical: pd.DataFrame, prepared: dict | None, labels: pd.Series, seed: int, feedback: Feedback
) -> dict:
    """Every evaluation the workflow asks for, as {part: {"tables": ..., "summary": ...}}, and the labels."""
    settings = flow.evaluation
    survival_seed, clinical_seed = child_seeds(seed, 2)
    parts: dict[str, object] = {"labels": labels}
    if flow.has_survival:
        with feedback.bar("log-rank permutations", settings.permutations) as progress:
            survival = evaluate_survival(
                labels,
                clinical,
                time_column=flow.cohort.time_column,
                event_column=flow.cohort.event_column,
                covariates=settings.covariates,
                strata=settings.strata,
                horizon=settings.rmst_horizon,
                n_permutations=settings.permutations,
                min_group_size=settings.min_group_size,
                random_state=survival_seed,
                progress=progress,
            )
        parts["survival"] = _as_record(survival)
    association = associate_clinical(
        labels,
        clinical,
        variables=list(settings.clinical_columns or clinical_variables(flow, clinical)),
        categorical=settings.categorical_columns,
        n_monte_carlo=settings.monte_carlo,
        random_state=clinical_seed,
    )
    parts["clinical"] = _as_record(association)
    if prepared is not None and prepared["views"]:
        markers = markers_by_modality(
            labels,
            normalised_views(prepared),
            test=settings.marker_test,
            top_n=settings.markers_per_subtype,
            fdr=settings.marker_fdr,
        )
        parts["markers"] = _as_record(markers)
        if settings.gene_sets is not None:
            parts["enrichment"] = _as_record(_enrichment(flow, markers))
    return parts


def _enrichment(flow: Workflow, markers):
    """Gene-set enrichment of the markers of one modality (evaluation.gene_set_modality or the first)."""
    settings = flow.evaluation
    read = read_gene_set_lines if settings.gene_set_format == "lines" else read_gene_set_table
    modality = settings.gene_set_modality or flow.modalities[0].name
    return enrich_markers(
        markers.tables[modality],
        read(settings.gene_sets),
        fdr=settings.marker_fdr,
        min_size=settings.min_set_size,
        max_size=settings.max_set_size,
        top_n=settings.sets_per_subtype,
    )
