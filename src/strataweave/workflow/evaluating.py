"""The evaluate stage: survival, clinical association, markers and enrichment of one grouping.

Works on our subtypes and equally on a grouping the user brings. A part whose inputs are
absent or too thin (no survival columns, no clinical variable, no modalities, no gene-set
file, a subtype with a single measured patient) is not run, and `not_run` says why: it maps
"survival", "clinical", "markers", "markers/<modality>" or "enrichment" to "not run: <reason>".
"""

from __future__ import annotations

import pandas as pd

from strataweave.evaluate.clinical import associate_clinical
from strataweave.errors import InputError
from strataweave.evaluate.enrichment import enrich_markers, set_membership
from strataweave.evaluate.gene_sets import read_gene_set_lines, read_gene_set_table
from strataweave.evaluate.markers import markers_by_modality, untestable_modality
from strataweave.evaluate.survival import evaluate_survival, untestable_outcome
from strataweave.seeding import child_seeds
from strataweave.workflow.config import Workflow
from strataweave.workflow.preparing import normalised_views
from strataweave.workflow.progress import Feedback

#: Version of the evaluate stage's result: part of its cache key, so that a result cached
#: before `not_run` existed is computed again rather than read without it.
EVALUATION_LAYOUT = 2
NOT_RUN = "not run: "


def clinical_variables(flow: Workflow, clinical: pd.DataFrame) -> list[str]:
    """Every clinical column except the survival time and event."""
    outcome = {flow.cohort.time_column, flow.cohort.event_column}
    return [column for column in clinical.columns if column not in outcome]


def _as_record(evaluation) -> dict:
    return {"tables": evaluation.tables, "summary": evaluation.summary}


def _survival_not_run(flow: Workflow, clinical: pd.DataFrame, labels: pd.Series) -> str | None:
    if not flow.has_survival:
        return "no survival columns in the workflow (cohort.time_column and cohort.event_column are not set)"
    return untestable_outcome(labels, clinical, flow.cohort.time_column, flow.cohort.event_column)


def _clinical_not_run(flow: Workflow, variables: list[str]) -> str | None:
    if variables:
        return None
    if flow.evaluation.clinical_columns is not None:
        return "evaluation.clinical_columns names no column"
    survival = " and the survival columns" if flow.has_survival else ""
    return f"the clinical table has no column besides the ID column {flow.cohort.id_column!r}{survival}"


def _enrichment_not_run(flow: Workflow, markers, reasons: dict[str, str]) -> str | None:
    if flow.evaluation.gene_sets is None:
        return "no gene-set file in the workflow (evaluation.gene_sets is not set)"
    if not flow.modalities:
        return "no omics layers in the workflow, so no markers to test"
    modality = gene_set_modality(flow)
    if markers is None or modality not in markers.tables:
        return f"the markers of {modality!r} were not run ({reasons[f'markers/{modality}']})"
    return None


def _survival(flow: Workflow, clinical: pd.DataFrame, labels: pd.Series, seed, feedback: Feedback):
    settings = flow.evaluation
    with feedback.bar("log-rank permutations", settings.permutations) as progress:
        return evaluate_survival(
            labels,
            clinical,
            time_column=flow.cohort.time_column,
            event_column=flow.cohort.event_column,
            covariates=settings.covariates,
            strata=settings.strata,
            horizon=settings.rmst_horizon,
            n_permutations=settings.permutations,
            min_group_size=settings.min_group_size,
            random_state=seed,
            progress=progress,
        )


def _markers(flow: Workflow, prepared: dict | None, labels: pd.Series) -> tuple[object | None, dict[str, str]]:
    """Markers of every modality that can be tested (None if none can), and why the others are not run."""
    views = normalised_views(prepared) if prepared is not None else {}
    if not views:
        return None, {"markers": "no omics layers in the workflow"}
    testable, reasons = {}, {}
    for name, view in views.items():
        reason = untestable_modality(labels, view, name)
        if reason is None:
            testable[name] = view
        else:
            reasons[f"markers/{name}"] = reason
    if not testable:
        return None, reasons
    settings = flow.evaluation
    markers = markers_by_modality(
        labels, testable, test=settings.marker_test, top_n=settings.markers_per_subtype, fdr=settings.marker_fdr
    )
    return markers, reasons


def evaluate_grouping(
    flow: Workflow, clinical: pd.DataFrame, prepared: dict | None, labels: pd.Series, seed: int, feedback: Feedback
) -> dict:
    """Every evaluation the workflow asks for, as {part: {"tables": ..., "summary": ...}}, the labels and `not_run`."""
    settings = flow.evaluation
    survival_seed, clinical_seed = child_seeds(seed, 2)
    parts: dict[str, object] = {"labels": labels}
    reasons: dict[str, str] = {}
    reason = _survival_not_run(flow, clinical, labels)
    if reason is None:
        parts["survival"] = _as_record(_survival(flow, clinical, labels, survival_seed, feedback))
    else:
        reasons["survival"] = reason
    variables = list(clinical_variables(flow, clinical) if settings.clinical_columns is None else settings.clinical_columns)
    reason = _clinical_not_run(flow, variables)
    if reason is None:
        association = associate_clinical(
            labels,
            clinical,
            variables=variables,
            categorical=settings.categorical_columns,
            n_monte_carlo=settings.monte_carlo,
            random_state=clinical_seed,
        )
        parts["clinical"] = _as_record(association)
    else:
        reasons["clinical"] = reason
    markers, skipped = _markers(flow, prepared, labels)
    reasons.update(skipped)
    if markers is not None:
        parts["markers"] = _as_record(markers)
    reason = _enrichment_not_run(flow, markers, reasons)
    if reason is None:
        parts["enrichment"] = _as_record(_enrichment(flow, markers))
    else:
        reasons["enrichment"] = reason
    parts["not_run"] = {part: NOT_RUN + reason for part, reason in reasons.items()}
    return parts


def gene_set_modality(flow: Workflow) -> str:
    """The modality whose markers enrichment tests: evaluation.gene_set_modality or the first."""
    return flow.evaluation.gene_set_modality or flow.modalities[0].name


def workflow_gene_sets(flow: Workflow) -> dict:
    """The gene sets of the workflow's `evaluation.gene_sets` file, read in its format."""
    read = read_gene_set_lines if flow.evaluation.gene_set_format == "lines" else read_gene_set_table
    return read(flow.evaluation.gene_sets)


def check_gene_sets(flow: Workflow, views: dict[str, pd.DataFrame]) -> None:
    """Before any heavy stage: InputError naming the workflow's gene-set file when no set in it names a
    measured feature of the modality it is for (`views`: the normalised modalities)."""
    modality = gene_set_modality(flow)
    if flow.evaluation.gene_sets is None or modality not in views:
        return
    features = pd.Index(views[modality].columns.astype(str))
    try:
        set_membership(workflow_gene_sets(flow), features, 1, max(1, len(features)))
    except InputError as problem:
        raise InputError(f"{flow.evaluation.gene_sets} (for modality {modality!r}): {problem}") from None


def _enrichment(flow: Workflow, markers):
    """Gene-set enrichment of the markers of one modality (evaluation.gene_set_modality or the first)."""
    settings = flow.evaluation
    return enrich_markers(
        markers.tables[gene_set_modality(flow)],
        workflow_gene_sets(flow),
        fdr=settings.marker_fdr,
        min_size=settings.min_set_size,
        max_size=settings.max_set_size,
        top_n=settings.sets_per_subtype,
    )
