"""The stages of a run: what each one computes and what its cache key covers.

run:      load -> prepare -> graphs -> sweep -> select -> final_fit -> evaluate
evaluate: load -> prepare (only with modalities) -> evaluate (of the grouping given)

From prepare on, each stage turns the results of the stages it reads into a typed result
with `to_state` / `from_state` (PreparedCohort, FusedGraph, the numeric layer's SweepResult,
FinalFit), rebuilt once when read from the cache; load, select and evaluate give plain dicts
of pandas, numpy and scipy objects for the codec. The numeric layers do the work. A
stage's parameters hold exactly the settings its result depends on: where the resamples run
(backend, n_jobs, scheduler) is left out because the results do not depend on it, and input
files enter by their sha256, not their path.

Sections: load, prepare, graphs, sweep / select / final fit, the grouping a run reports,
evaluate, and last the list of stages.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, fields, replace
from pathlib import Path

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from strataweave.data.assembly import cohort_from_tables
from strataweave.codec import CodecState, decode, encode, prefixed, unprefixed
from strataweave.data.cohort import Cohort
from strataweave.data.preprocess import Preprocessor
from strataweave.data.qc import applied_filters, qc_summary
from strataweave.data.readers import read_clinical, read_matrix
from strataweave.errors import InputError
from strataweave.evaluate.clinical import associate_clinical
from strataweave.evaluate.enrichment import enrich_markers, set_membership
from strataweave.evaluate.gene_sets import read_gene_set_lines, read_gene_set_table
from strataweave.evaluate.grouping import group_order
from strataweave.evaluate.markers import markers_by_modality, untestable_modality
from strataweave.evaluate.outcome import read_outcome
from strataweave.evaluate.survival import evaluate_survival, untestable_outcome
from strataweave.factorize.views import relative_modality_weights
from strataweave.graph import fuse_modalities, modality_agreement, spectral_embedding
from strataweave.seeding import child_seeds
from strataweave.subtypes.parallel import ParallelSettings, available_cores
from strataweave.subtypes.projection import placement, project_patients
from strataweave.subtypes.recommend import Recommendation
from strataweave.subtypes.result import SweepResult, subtype_labels, subtype_names
from strataweave.subtypes.settings import SweepSettings
from strataweave.subtypes.sweep import planned_tasks, sweep_subtype_counts
from strataweave.workflow.cache import WORK, ResampleCheckpoint, Stage
from strataweave.workflow.config import Workflow
from strataweave.workflow.progress import Feedback

# ---------------------------------------------------------------------------------------------
# The load stage: read the clinical table and every modality file, and check the columns named.
# ---------------------------------------------------------------------------------------------

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


# ---------------------------------------------------------------------------------------------
# The prepare stage: the data layer's Cohort of the workflow's modalities, kept as plain tables.
#
# Each modality is normalised, filtered, imputed and made non-negative by
# `strataweave.data.prepare_modality`, fitted on the patients of the clinical table; the
# `Cohort` then chooses the analysis patients (clinical IDs measured on at least one
# modality, in clinical order), the presence table, the aligned views (all-NaN rows where a
# modality is missing, which is how the factorisation is told about a missing modality) and
# the table of modality patients left out (absent from the clinical table, or differing from
# a clinical ID only in case: reported, never merged). The stage result, a PreparedCohort,
# holds these as pandas objects beside the fitted preprocessors. The patient graph and the
# marker tests read `normalised_views` instead: the same data before the sign split.
# ---------------------------------------------------------------------------------------------

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


@dataclass(frozen=True)
class PreparedCohort:
    """What the later stages and `assign` need from the Cohort.

    views: each modality's NMF input on its own patients; aligned_views: the same on every
    analysis patient, all-NaN rows where one lacks it (Cohort.aligned_views); normalised_views:
    each modality on its normalised scale, for the patient graphs and the markers
    (Cohort.normalised_views); qc: one results.json row per modality; unmatched: the modality
    patients left out, and dropped their count per modality.
    """

    patients: pd.Index
    views: dict[str, pd.DataFrame]
    aligned_views: list[pd.DataFrame]
    normalised_views: dict[str, pd.DataFrame]
    preprocessors: dict[str, Preprocessor]
    presence: pd.DataFrame
    qc: list[dict]
    unmatched: pd.DataFrame
    dropped: dict[str, int]

    def to_state(self) -> tuple[dict, dict[str, np.ndarray]]:
        """(JSON-safe dict, arrays for .npz): the tables through the codec, each modality's preprocessor by
        its own `to_state` (arrays `p<position>_...`)."""
        tables, arrays = encode({f.name: getattr(self, f.name) for f in fields(self) if f.name != "preprocessors"})
        preprocessors = []
        for position, (name, preprocessor) in enumerate(self.preprocessors.items()):
            state, parts = preprocessor.to_state()
            preprocessors.append({"name": name, "state": state})
            arrays.update(prefixed(f"p{position}_", parts))
        return {"tables": tables, "preprocessors": preprocessors}, arrays

    @classmethod
    def from_state(cls, state: dict, arrays) -> "PreparedCohort":
        """The prepared cohort that `to_state` saved."""
        preprocessors = {
            entry["name"]: Preprocessor.from_state(entry["state"], unprefixed(f"p{position}_", arrays))
            for position, entry in enumerate(state["preprocessors"])
        }
        return cls(**decode(state["tables"], arrays), preprocessors=preprocessors)


def prepare_cohort(flow: Workflow, loaded: dict) -> PreparedCohort:
    """The prepare stage's result, from the Cohort of the workflow's modalities."""
    cohort = build_cohort(flow, loaded)
    unmatched = cohort.unmatched["modality"].value_counts()
    return PreparedCohort(
        patients=cohort.patients,
        views={m.name: m.data for m in cohort.modalities},
        aligned_views=cohort.aligned_views(),
        normalised_views=cohort.normalised_views(),
        preprocessors={m.name: m.preprocessor for m in cohort.modalities},
        presence=cohort.presence,
        qc=qc_rows(cohort),
        unmatched=cohort.unmatched,
        dropped={name: int(unmatched.get(name, 0)) for name in cohort.names},
    )


# ---------------------------------------------------------------------------------------------
# The graphs stage: one patient graph per modality, fused by the workflow's rule, with diagnostics.
# ---------------------------------------------------------------------------------------------

#: The columns of the fusion-rule evidence written to results.json (per-modality shares stay in the graph).
EVIDENCE_COLUMNS = ("rule", "quorum", "confirmed_share", "fallback_patients", "chosen")


@dataclass(frozen=True)
class FusedGraph(CodecState):
    """The graphs stage's result: the fused affinity on the analysis patients (their order), its 2-D
    spectral embedding and the results.json `graph` section."""

    affinity: sp.csr_matrix
    embedding: np.ndarray
    summary: dict
    modality_graphs: dict[str, sp.csr_matrix]


def build_graph(flow: Workflow, prepared: PreparedCohort, seed: int, feedback: Feedback) -> FusedGraph:
    """The fused graph of the workflow's modalities, with the rule's evidence and the modalities' agreement."""
    settings = flow.graph
    views = prepared.normalised_views
    with feedback.bar("patient graphs", 2 * len(views)) as progress:
        graph = fuse_modalities(
            views,
            rule=settings.rule,
            quorum=settings.quorum,
            n_neighbours=settings.n_neighbours,
            metric=settings.metric,
            kernel=settings.kernel,
            neighbour_search=settings.neighbour_search,
            random_state=seed,
            progress=progress,
        )
    graph = graph.restrict(prepared.patients)
    affinity = sp.csr_matrix(graph.affinity)
    agreement = modality_agreement(graph)
    names = list(agreement.index)
    n_components, _ = connected_components(affinity, directed=False)
    return FusedGraph(
        affinity=affinity,
        embedding=spectral_embedding(affinity, n_dims=2),
        summary={
            "rule": graph.rule,
            "quorum": graph.parameters["quorum"],
            "rule_requested": graph.parameters["rule_requested"],
            "rule_evidence": graph.rule_evidence[list(EVIDENCE_COLUMNS)].to_dict(orient="records"),
            "neighbours": settings.n_neighbours,
            "neighbour_search": graph.parameters["neighbour_search"],
            "neighbour_search_requested": settings.neighbour_search,
            "approximate_above": graph.parameters["approximate_above"],
            "isolated_patients": int(len(graph.isolated_patients)),
            "fallback_patients": int(len(graph.fallback_patients)),
            "components": int(n_components),
            "agreement": [
                {"modality_a": a, "modality_b": b, "overlap": _number(agreement.loc[a, b])}
                for i, a in enumerate(names)
                for b in names[i + 1:]
            ],
        },
        modality_graphs={name: sp.csr_matrix(own) for name, own in graph.modality_graphs.items()},
    )


def _number(value: float) -> float | None:
    return float(value) if np.isfinite(value) else None


# ---------------------------------------------------------------------------------------------
# The sweep, select and final-fit stages.
#
# The sweep fits every count on all patients and on the resamples. Select applies the
# recommendation rule, or the count the workflow fixes, without rerunning the sweep. The
# final fit is the full-data fit of the sweep at the chosen count (fitted with the
# workflow's factorisation settings), completed with what `assign` needs: the subtype
# centres and the distance beyond which a new patient is far from every subtype.
# ---------------------------------------------------------------------------------------------

def factorization_options(flow: Workflow, prepared: PreparedCohort) -> dict:
    """JointNMF keyword arguments from the workflow (rank and seed are set per fit)."""
    settings = flow.factorization
    options = {
        "graph_weight": settings.graph_weight,
        "max_iter": settings.max_iter,
        "tol": settings.tol,
        "init": settings.init,
        "n_restarts": settings.n_restarts,
    }
    weights = relative_modality_weights(list(prepared.views.values()), [m.weight for m in flow.modalities])
    if weights is not None:
        options["modality_weights"] = weights
    return options


def sweep_settings(flow: Workflow) -> SweepSettings:
    subtypes, resampling = flow.subtypes, flow.resampling
    return SweepSettings(
        n_resamples=resampling.n_resamples,
        fraction=resampling.fraction,
        feature_fraction=resampling.feature_fraction,
        pac_window=tuple(subtypes.pac_window),
        pac_tolerance=subtypes.pac_tolerance,
        min_size=subtypes.min_size,
        core_threshold=subtypes.core_threshold,
        resample_restarts=resampling.resample_restarts,
        warm_start=resampling.warm_start,
        start_from=flow.factorization.start_from,
        labels_from=flow.subtypes.labels_from,
    )


def run_sweep(
    flow: Workflow, prepared: PreparedCohort, graphs: FusedGraph, seed: int, feedback: Feedback, work: Path | None = None
) -> SweepResult:
    """Sweep the workflow's counts, each finished resample kept in `work` (if given) for a resumed sweep."""
    settings = sweep_settings(flow)
    views = dict(zip(prepared.views, prepared.aligned_views))
    profiles = {name: frame.reindex(prepared.patients) for name, frame in prepared.normalised_views.items()}
    parallel = ParallelSettings(
        backend=flow.resampling.backend, n_jobs=flow.resampling.n_jobs or available_cores(),
        scheduler=flow.resampling.scheduler,
        checkpoint=None if work is None else ResampleCheckpoint(work, feedback.say),
    )
    with feedback.bar("subtype count sweep", planned_tasks(flow.subtypes.counts, settings)) as progress:
        return sweep_subtype_counts(
            views,
            graphs.affinity,
            flow.subtypes.counts,
            profiles=profiles,
            settings=settings,
            factorization=factorization_options(flow, prepared),
            parallel=parallel,
            random_state=seed,
            progress=progress,
            modality_graphs=graphs.modality_graphs,
        )


def select_count(flow: Workflow, sweep: SweepResult) -> dict:
    """The count to use: the rule's recommendation, or the workflow's `subtypes.use_count`."""
    fixed = flow.subtypes.use_count if isinstance(flow.subtypes.use_count, int) else None
    chosen = sweep.with_user_count(fixed)
    return {"count": int(chosen.count), "user_count": fixed, "recommendation": chosen.recommendation.to_dict()}


def chosen_sweep(sweep: SweepResult, selected: dict) -> SweepResult:
    """The sweep with the selected count's recommendation."""
    return replace(
        sweep,
        settings=replace(sweep.settings, user_count=selected["user_count"]),
        recommendation=Recommendation(**selected["recommendation"]),
    )


@dataclass(frozen=True)
class FinalFit(CodecState):
    """The final fit's result: the chosen count, the subtype names, the sweep's assignments at that
    count, and the subtype centres and far threshold that place new patients (the model itself
    stays in the sweep: `sweep.models[count]`)."""

    count: int
    names: list[str]
    assignments: pd.DataFrame
    centres: np.ndarray
    far_threshold: float

    @property
    def labels(self) -> pd.Series:
        """Subtype names per patient (S1, S2, ...)."""
        return subtype_labels(self.assignments["subtype"], self.count)


def final_fit(prepared: PreparedCohort, sweep: SweepResult, selected: dict) -> FinalFit:
    """Labels and scores at the chosen count, with the subtype centres for new patients.

    New patients get their patient factor by projection on the loadings (no graph), so the
    centres and the far threshold are taken from the training patients projected the same
    way: a training patient passed back through `assign` then meets the centres it helped make.
    """
    count = selected["count"]
    assignments = sweep.assignments[count]
    labels = assignments["subtype"].to_numpy()
    centres, far = placement(project_patients(sweep.models[count], prepared.aligned_views), labels, count)
    return FinalFit(count, subtype_names(count), assignments, centres, far)


# ---------------------------------------------------------------------------------------------
# The grouping a run reports: our subtypes (run) or the user's groups (evaluate), on one patient order.
# ---------------------------------------------------------------------------------------------

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


def subtype_grouping(fitted: FinalFit) -> ReportedGrouping:
    """The final subtypes of a run, with the labeller's confidence and scores."""
    assignments = fitted.assignments
    names = list(fitted.names)
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


def analysis_patients(loaded: dict, prepared: PreparedCohort | None) -> pd.Index:
    """Clinical patients measured on at least one modality (all clinical patients without modalities)."""
    return prepared.patients if prepared is not None else loaded["clinical"].index


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


# ---------------------------------------------------------------------------------------------
# The evaluate stage: survival, clinical association, markers and enrichment of one grouping.
#
# Works on our subtypes and equally on a grouping the user brings. A part whose inputs are
# absent or too thin (no survival columns, no clinical variable, no modalities, no gene-set
# file, a subtype with a single measured patient) is not run, and `not_run` says why: it maps
# "survival", "clinical", "markers", "markers/<modality>" or "enrichment" to "not run: <reason>".
# ---------------------------------------------------------------------------------------------

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
    with feedback.bar("log-rank permutations", settings.n_permutations) as progress:
        return evaluate_survival(
            labels,
            clinical,
            time_column=flow.cohort.time_column,
            event_column=flow.cohort.event_column,
            covariates=settings.covariates,
            strata=settings.strata,
            rmst_horizon=settings.rmst_horizon,
            n_permutations=settings.n_permutations,
            min_group_size=settings.min_group_size,
            random_state=seed,
            progress=progress,
        )


def _markers(flow: Workflow, prepared: PreparedCohort | None, labels: pd.Series) -> tuple[object | None, dict[str, str]]:
    """Markers of every modality that can be tested (None if none can), and why the others are not run."""
    views = prepared.normalised_views if prepared is not None else {}
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
        labels, testable, marker_test=settings.marker_test, markers_per_subtype=settings.markers_per_subtype,
        marker_fdr=settings.marker_fdr,
    )
    return markers, reasons


def evaluate_grouping(
    flow: Workflow, clinical: pd.DataFrame, prepared: PreparedCohort | None, labels: pd.Series, seed: int, feedback: Feedback
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
            clinical_columns=variables,
            categorical_columns=settings.categorical_columns,
            n_monte_carlo=settings.n_monte_carlo,
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
        marker_fdr=settings.marker_fdr,
        min_set_size=settings.min_set_size,
        max_set_size=settings.max_set_size,
        sets_per_subtype=settings.sets_per_subtype,
    )


# ---------------------------------------------------------------------------------------------
# The stages of `strataweave run` and `strataweave evaluate`
# ---------------------------------------------------------------------------------------------

def _load_stage(flow: Workflow, hashes: dict[str, str]) -> Stage:
    parameters = {
        "clinical": hashes["clinical"],
        "id_column": flow.cohort.id_column,
        "modalities": [
            {"name": m.name, "kind": m.kind, "orientation": m.orientation, "sha256": hashes[f"modality:{m.name}"]}
            for m in flow.modalities
        ],
    }
    return Stage("load", (), parameters, lambda inputs: load_inputs(flow))


def _prepare_stage(flow: Workflow) -> Stage:
    parameters = {
        "layout": RESULT_LAYOUT,
        "modalities": [{"name": m.name, **m.preprocessing()} for m in flow.modalities],
    }
    return Stage("prepare", ("load",), parameters, lambda inputs: prepare_cohort(flow, inputs["load"]),
                 result_type=PreparedCohort)


def _evaluation_parameters(flow: Workflow, hashes: dict[str, str], seed: int) -> dict:
    settings = dataclasses.asdict(flow.evaluation)
    settings["gene_sets"] = hashes.get("gene_sets")
    cohort = {"time_column": flow.cohort.time_column, "event_column": flow.cohort.event_column}
    return {"layout": EVALUATION_LAYOUT, "evaluation": settings, "cohort": cohort, "seed": seed,
            "groups": hashes.get("groups")}


def _graph_parameters(flow: Workflow, seed: int) -> dict:
    """The [graph] keys, and the seed where the search may be approximate (an exact graph ignores it)."""
    settings = dataclasses.asdict(flow.graph)
    return settings if flow.graph.neighbour_search == "exact" else {**settings, "seed": seed}


def build_stages(
    flow: Workflow, hashes: dict[str, str], seeds: dict[str, int], feedback: Feedback, groups: pd.Series | None = None
) -> list[Stage]:
    """The stages of `strataweave run`, or of `strataweave evaluate` when `groups` is given."""
    stages = [_load_stage(flow, hashes)]
    if flow.modalities:
        stages.append(_prepare_stage(flow))
    evaluation = _evaluation_parameters(flow, hashes, seeds["evaluate"])
    if groups is not None:
        needs = ("load", "prepare") if flow.modalities else ("load",)

        def evaluate_given(inputs: dict) -> dict:
            patients = analysis_patients(inputs["load"], inputs.get("prepare"))
            labels = given_grouping(groups, patients).labels
            return evaluate_grouping(flow, inputs["load"]["clinical"], inputs.get("prepare"), labels,
                                     seeds["evaluate"], feedback)

        stages.append(Stage("evaluate", needs, evaluation, evaluate_given))
        return stages
    sweep_parameters = {
        "counts": sorted(set(flow.subtypes.counts)),
        "settings": sweep_settings(flow).to_dict(),
        "factorization": {"settings": dataclasses.asdict(flow.factorization), "weights": [m.weight for m in flow.modalities]},
        "seed": seeds["sweep"],
    }
    stages += [
        Stage("graphs", ("prepare",), _graph_parameters(flow, seeds["graphs"]),
              lambda inputs: build_graph(flow, inputs["prepare"], seeds["graphs"], feedback), result_type=FusedGraph),
        Stage("sweep", ("prepare", "graphs"), sweep_parameters,
              lambda inputs: run_sweep(flow, inputs["prepare"], inputs["graphs"], seeds["sweep"], feedback,
                                       inputs[WORK]),
              keeps_work=True, result_type=SweepResult),
        Stage("select", ("sweep",), {"use_count": flow.subtypes.use_count},
              lambda inputs: select_count(flow, inputs["sweep"])),
        Stage("final_fit", ("prepare", "sweep", "select"), {},
              lambda inputs: final_fit(inputs["prepare"], inputs["sweep"], inputs["select"]), result_type=FinalFit),
        Stage(
            "evaluate",
            ("load", "prepare", "final_fit"),
            evaluation,
            lambda inputs: evaluate_grouping(
                flow, inputs["load"]["clinical"], inputs["prepare"], inputs["final_fit"].labels,
                seeds["evaluate"], feedback,
            ),
        ),
    ]
    return stages
