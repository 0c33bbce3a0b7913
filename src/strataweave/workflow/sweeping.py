"""The sweep, select and final-fit stages, and the cacheable record of a sweep.

The sweep fits every count on all patients and on the resamples. Select applies the
recommendation rule, or the count the workflow fixes, without rerunning the sweep. The
final fit is the full-data fit of the sweep at the chosen count (fitted with the
workflow's factorisation settings), completed with what `assign` needs: the subtype
centres and the distance beyond which a new patient is far from every subtype.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import pandas as pd

from strataweave.factorize import JointNMF
from strataweave.factorize.views import relative_modality_weights
from strataweave.subtypes.parallel import ParallelSettings, available_cores
from strataweave.subtypes.projection import placement, project_patients
from strataweave.subtypes.recommend import Recommendation
from strataweave.subtypes.result import SweepResult, subtype_labels, subtype_names
from strataweave.subtypes.settings import SweepSettings
from strataweave.subtypes.sweep import planned_tasks, sweep_subtype_counts
from strataweave.workflow.config import Workflow
from strataweave.workflow.preparing import aligned_views, normalised_views
from strataweave.workflow.progress import Feedback
from strataweave.workflow.resample_checkpoint import ResampleCheckpoint


def factorization_options(flow: Workflow, prepared: dict) -> dict:
    """JointNMF keyword arguments from the workflow (rank and seed are set per fit)."""
    settings = flow.factorization
    options = {
        "graph_weight": settings.graph_weight,
        "max_iter": settings.max_iter,
        "tol": settings.tolerance,
        "init": settings.init,
        "n_restarts": settings.restarts,
    }
    weights = relative_modality_weights(list(prepared["views"].values()), [m.weight for m in flow.modalities])
    if weights is not None:
        options["modality_weights"] = weights
    return options


def sweep_settings(flow: Workflow) -> SweepSettings:
    subtypes, resampling = flow.subtypes, flow.resampling
    return SweepSettings(
        n_resamples=resampling.resamples,
        fraction=resampling.fraction,
        feature_fraction=resampling.feature_fraction,
        pac_window=tuple(subtypes.pac_window),
        pac_tolerance=subtypes.pac_tolerance,
        min_size=subtypes.min_size,
        core_threshold=subtypes.core_threshold,
        resample_restarts=resampling.restarts,
        warm_start=resampling.warm_start,
        start_from=flow.factorization.start_from,
        labels_from=flow.subtypes.labels_from,
    )


def run_sweep(
    flow: Workflow, prepared: dict, graphs: dict, seed: int, feedback: Feedback, work: Path | None = None
) -> dict:
    """Sweep the workflow's counts, each finished resample kept in `work` (if given) for a resumed
    sweep; the result as a cacheable record (see `sweep_from_record`)."""
    settings = sweep_settings(flow)
    views = dict(zip(prepared["views"], aligned_views(prepared)))
    profiles = {name: frame.reindex(prepared["patients"]) for name, frame in normalised_views(prepared).items()}
    parallel = ParallelSettings(
        backend=flow.resampling.backend, n_jobs=flow.resampling.jobs or available_cores(),
        scheduler=flow.resampling.scheduler,
        checkpoint=None if work is None else ResampleCheckpoint(work, feedback.say),
    )
    with feedback.bar("subtype count sweep", planned_tasks(flow.subtypes.counts, settings)) as progress:
        result = sweep_subtype_counts(
            views,
            graphs["affinity"],
            flow.subtypes.counts,
            profiles=profiles,
            settings=settings,
            factorization=factorization_options(flow, prepared),
            parallel=parallel,
            random_state=seed,
            progress=progress,
        )
    return sweep_record(result)


def _model_record(model: JointNMF) -> dict:
    state, arrays = model.to_state()
    return {"state": state, "arrays": arrays, "patient_factor": model.patient_factor_}


def model_from_record(record: dict) -> JointNMF:
    model = JointNMF.from_state(record["state"], record["arrays"])
    model.patient_factor_ = record["patient_factor"]
    return model


def sweep_record(result: SweepResult) -> dict:
    """A SweepResult as plain containers the stage cache stores losslessly."""
    return {
        "patients": result.patients,
        "counts": list(result.counts),
        "criteria": result.criteria,
        "consensus": result.consensus,
        "consensus_patients": result.consensus_patients,
        "assignments": result.assignments,
        "resample_labels": result.resample_labels,
        "baseline_labels": result.baseline_labels,
        "baselines": result.baselines,
        "partitions": result.partitions,
        "flow": result.flow,
        "models": {k: _model_record(model) for k, model in result.models.items()},
        "recommendation": result.recommendation.to_dict(),
        "settings": result.settings.to_dict(),
        "unconverged": int(result.unconverged),
    }


def sweep_from_record(record: dict) -> SweepResult:
    """The SweepResult that `sweep_record` stored."""
    settings = dict(record["settings"])
    settings["pac_window"] = tuple(settings["pac_window"])
    return SweepResult(
        patients=record["patients"],
        counts=list(record["counts"]),
        criteria=record["criteria"],
        consensus=record["consensus"],
        consensus_patients=record["consensus_patients"],
        assignments=record["assignments"],
        resample_labels=record["resample_labels"],
        baseline_labels=record["baseline_labels"],
        baselines=record["baselines"],
        partitions=record["partitions"],
        flow=record["flow"],
        models={k: model_from_record(model) for k, model in record["models"].items()},
        recommendation=Recommendation(**record["recommendation"]),
        settings=SweepSettings(**settings),
        unconverged=record["unconverged"],
    )


def select_count(flow: Workflow, sweep: dict) -> dict:
    """The count to use: the rule's recommendation, or the workflow's `subtypes.use_count`."""
    fixed = flow.subtypes.use_count if isinstance(flow.subtypes.use_count, int) else None
    chosen = sweep_from_record(sweep).with_user_count(fixed)
    return {"count": int(chosen.count), "user_count": fixed, "recommendation": chosen.recommendation.to_dict()}


def chosen_sweep(sweep: dict, selected: dict) -> SweepResult:
    """The sweep with the selected count's recommendation."""
    result = sweep_from_record(sweep)
    return replace(
        result,
        settings=replace(result.settings, user_count=selected["user_count"]),
        recommendation=Recommendation(**selected["recommendation"]),
    )


def final_fit(prepared: dict, sweep: dict, selected: dict) -> dict:
    """Model, labels and scores at the chosen count, with the subtype centres for new patients.

    New patients get their patient factor by projection on the loadings (no graph), so the
    centres and the far threshold are taken from the training patients projected the same
    way: a training patient passed back through `assign` then meets the centres it helped make.
    """
    count = selected["count"]
    model = sweep["models"][count]
    assignments = sweep["assignments"][count]
    labels = assignments["subtype"].to_numpy()
    centres, far = placement(project_patients(model_from_record(model), aligned_views(prepared)), labels, count)
    return {
        "count": count,
        "names": subtype_names(count),
        "model": model,
        "assignments": assignments,
        "centres": centres,
        "far_threshold": far,
    }


def final_labels(fitted: dict) -> pd.Series:
    """Subtype names per patient (S1, S2, ...)."""
    return subtype_labels(fitted["assignments"]["subtype"], fitted["count"])
