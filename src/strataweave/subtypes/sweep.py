"""Sweep of subtype counts: resampling consensus, criteria, baselines and a recommended count.

For each count, the joint NMF is fitted on all patients and the best-fitting candidate
partition taken (final labels); each resample of the patients (graph restricted to the drawn
ones) repeats the way of partitioning that count's full-data fit took; the resample labels
give the consensus matrix (Monti et al. 2003) and the criteria. Tasks run on the backend of `parallel`.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import replace

import numpy as np
import pandas as pd
import scipy.sparse as sp
from sklearn.metrics import silhouette_score

from strataweave.errors import InputError
from strataweave.graph import PatientGraph, eigengaps, spectral_embedding
from strataweave.seeding import child_seeds
from strataweave.subtypes.baselines import concatenated_scaled
from strataweave.subtypes.compare import compare_partitions, split_flow
from strataweave.subtypes.consensus import kept_patients, summarise_consensus
from strataweave.subtypes.criteria import cophenetic_correlation, resample_stability, smallest_subtype_size
from strataweave.subtypes.parallel import ParallelSettings, TaskRunner
from strataweave.subtypes.partitions import graph_degree, joint_coordinates, modality_partitions
from strataweave.subtypes.recommend import recommend_count
from strataweave.subtypes.result import SweepResult
from strataweave.subtypes.settings import SweepSettings, check_counts, default_min_size
from strataweave.subtypes.tasks import SweepInputs, fit_full_data, fit_resample


#: Patients above which silhouettes are taken on a seeded sample of this many: the exact one
#: takes all N^2 distances (at 50,000 patients, minutes per count and baseline, serially).
SILHOUETTE_SIDE = 5_000


def planned_tasks(counts: Iterable[int], settings: SweepSettings = SweepSettings()) -> int:
    """How many tasks a sweep runs (one full-data fit per count, one task per resample): the
    total for a progress bar fed by the sweep's `progress` callable."""
    return len(set(counts)) + settings.n_resamples


def _named_arrays(views: Mapping | Sequence) -> tuple[dict[str, np.ndarray], pd.Index | None]:
    """Modalities as name -> float array, and the shared patient index of DataFrame input."""
    if isinstance(views, Mapping):
        items = list(views.items())
    elif isinstance(views, (list, tuple)):
        items = [(getattr(v, "name", None) or f"view {i}", v) for i, v in enumerate(views)]
    else:
        raise InputError(f"views: found {type(views).__name__}; expected a list or dict of patients x features tables")
    if not items:
        raise InputError("views: found none; expected at least one modality")
    indexes = [(str(name), v.index) for name, v in items if isinstance(v, pd.DataFrame)]
    for name, index in indexes[1:]:
        if not index.equals(indexes[0][1]):
            raise InputError(
                f"view {name!r}: patient index differs from view {indexes[0][0]!r}; "
                "expected every view aligned on one patient index"
            )
    arrays = {str(name): np.asarray(v, dtype=np.float64) for name, v in items}
    return arrays, indexes[0][1] if indexes else None


def _profile_arrays(profiles, patients: pd.Index, n_patients: int, arrays: dict) -> dict[str, np.ndarray]:
    """The profiles as name -> float array on the views' patients (the views themselves when None)."""
    if profiles is None:
        return arrays
    measured, index = _named_arrays(profiles)
    for name, values in measured.items():
        if values.shape[0] != n_patients or (index is not None and not index.equals(patients)):
            raise InputError(f"profile {name!r}: found {values.shape[0]} patients in another order or number; "
                             f"expected the views' {n_patients} patients in their order")
    return measured


def _affinity(graph: PatientGraph | sp.spmatrix, patients: pd.Index | None, n_patients: int) -> sp.csr_matrix:
    if isinstance(graph, PatientGraph):
        if patients is not None and not graph.patients.equals(patients):
            raise InputError("graph: patients differ from the views' patient index; expected the same patients in the same order")
        graph = graph.affinity
    if not sp.issparse(graph) or graph.shape != (n_patients, n_patients):
        raise InputError(
            f"graph: found {type(graph).__name__} of shape {getattr(graph, 'shape', None)}; "
            f"expected a PatientGraph or sparse affinity of shape ({n_patients}, {n_patients})"
        )
    return sp.csr_matrix(graph, dtype=np.float64)


def _modality_graphs(graph, modality_graphs, n: int) -> list[sp.csr_matrix]:
    """Each modality's own graph (given, or the PatientGraph's); none for a bare affinity."""
    if modality_graphs is None and isinstance(graph, PatientGraph):
        modality_graphs = graph.modality_graphs
    if not modality_graphs:
        return []
    for name, own in modality_graphs.items():
        if not sp.issparse(own) or own.shape != (n, n):
            raise InputError(f"modality graph {name!r}: found shape {getattr(own, 'shape', None)}; "
                             f"expected a sparse ({n}, {n}) graph on the views' patients")
    return [sp.csr_matrix(own, dtype=np.float64) for own in modality_graphs.values()]


def sweep_subtype_counts(
    views: Mapping | Sequence,
    graph: PatientGraph | sp.spmatrix,
    counts: Iterable[int] = range(2, 9),
    *,
    profiles: Mapping | Sequence | None = None,
    settings: SweepSettings = SweepSettings(),
    factorization: Mapping | None = None,
    parallel: ParallelSettings = ParallelSettings(),
    random_state: int | None = None,
    progress: Callable[[int], None] | None = None,
    modality_graphs: Mapping[str, sp.spmatrix] | None = None,
) -> SweepResult:
    """Fit every count on all patients and on `settings.n_resamples` resamples; judge and recommend.

    views: modalities (list or dict) of non-negative patients x features tables aligned on one
    patient index, all-NaN rows for a missing modality. graph: the fused PatientGraph (or its
    affinity) on the same patients. profiles: the same modalities on their normalised scale,
    before any sign split or shift, aligned like `views` (default: the views): the
    concatenation partition and the k-means baseline measure distances on them, since a sign
    split or shift made for the factorisation distorts distances between patients (on the
    validity panel, mean ARI at the planted count 0.674 from the split views, 0.698 from the
    profiles). factorization: JointNMF keyword arguments (graph_weight,
    max_iter, tol, init, n_restarts, dtype, ...). progress: called with the number of finished
    tasks (total: :func:`planned_tasks`). modality_graphs: each modality's own patient graph
    on the same patients, whose spectral partitions vote on the candidate partitions
    (`partitions`) and whose mean modularity the criteria report; default: those of a
    PatientGraph `graph`, else none (the candidates vote among themselves, the fused affinity
    gives the modularity).
    """
    arrays, patients = _named_arrays(views)
    n_patients = next(iter(arrays.values())).shape[0]
    patients = patients if patients is not None else pd.RangeIndex(n_patients, name="patient")
    affinity = _affinity(graph, patients, n_patients)
    if settings.min_size is None:
        settings = replace(settings, min_size=default_min_size(n_patients))
    counts = check_counts(counts, n_patients, settings.min_size)
    factorization = dict(factorization or {})
    for fixed in ("n_components", "random_state"):
        if fixed in factorization:
            raise InputError(f"factorization: found {fixed!r}; expected it left to the sweep")

    full_root, resample_root, joint_root, kept_root, vote_root = child_seeds(random_state, 5)
    own_graphs = _modality_graphs(graph, modality_graphs, n_patients)
    concatenated = concatenated_scaled(list(_profile_arrays(profiles, patients, n_patients, arrays).values()))
    shared = SweepInputs(
        arrays, affinity, counts, factorization, settings, concatenated,
        joint_coordinates(concatenated, joint_root), graph_degree(affinity),
        own_graphs or [affinity], modality_partitions(own_graphs, counts, vote_root),
    )
    count_seeds = child_seeds(full_root, max(counts) + 1)
    with TaskRunner(parallel) as runner:
        fits = runner.map(fit_full_data, shared, [(k, count_seeds[k]) for k in counts], progress)
        if settings.warm_start:
            shared = replace(
                shared, warm_factors={fit.count: (fit.model.patient_factor_, fit.model.components_) for fit in fits}
            )
        shared = replace(shared, sources={fit.count: fit.source for fit in fits})
        resample_tasks = list(enumerate(child_seeds(resample_root, settings.n_resamples)))
        resamples = runner.map(fit_resample, shared, resample_tasks, progress, done_before=len(counts))

    stacked = np.stack([fit.labels for fit in resamples], axis=1)  # counts x resamples x patients
    resample_labels = {k: stacked[i] for i, k in enumerate(counts)}
    kept = kept_patients(n_patients, kept_root)
    unconverged = sum(r.unconverged for r in resamples)
    return _assemble(patients, affinity, counts, settings, fits, resample_labels, kept, unconverged)


def _assemble(patients, affinity, counts, settings, fits, resample_labels, kept, resample_unconverged) -> SweepResult:
    """Criteria, consensus, assignments, baselines, flow and recommendation from the fits."""
    embedding = spectral_embedding(affinity, n_dims=min(max(counts), len(patients) - 1))
    gaps = eigengaps(affinity, max(counts))["gap"]
    rows, consensus, assignments, baseline_labels, baseline_rows, partitions = {}, {}, {}, {}, [], {}
    for fit in fits:
        k = fit.count
        summary = summarise_consensus(resample_labels[k], fit.labels, settings.pac_window, kept)
        consensus[k] = summary.matrix
        own, core = summary.own, summary.core(settings.core_threshold)
        scores = pd.DataFrame(fit.scores, index=patients, columns=[f"score_{j}" for j in range(k)])
        assignments[k] = pd.concat(
            [
                pd.DataFrame(
                    {"subtype": fit.labels, "confidence": fit.confidence, "own_consensus": own, "core": core},
                    index=patients,
                ),
                scores,
            ],
            axis=1,
        )
        rows[k] = {
            "pac": summary.pac,
            "cophenetic": cophenetic_correlation(consensus[k]),
            "silhouette": _silhouette(embedding, fit.labels),
            "eigengap": float(gaps.loc[k]),
            "reconstruction_error": float(np.mean(fit.model.reconstruction_error_)),
            "smallest_subtype": smallest_subtype_size(fit.labels),
            "stability": resample_stability(resample_labels[k], fit.labels),
            "modularity": fit.modularity,
        }
        partitions[k] = {"source": fit.source, **{f"agreement_{name}": a for name, a in fit.agreement.items()}}
        baseline_labels[k] = pd.DataFrame(fit.baseline_labels, index=patients)
        for method, labels in fit.baseline_labels.items():
            agreement = compare_partitions(fit.labels, labels)
            baseline_rows.append(
                {
                    "count": k,
                    "method": method,
                    "ari": agreement.ari,
                    "nmi": agreement.nmi,
                    "silhouette": _silhouette(embedding, labels),
                    "smallest_subtype": smallest_subtype_size(labels),
                }
            )
    criteria = pd.DataFrame.from_dict(rows, orient="index").rename_axis("count")
    recommendation = recommend_count(
        criteria, min_size=settings.min_size, pac_tolerance=settings.pac_tolerance, user_count=settings.user_count
    )
    return SweepResult(
        patients=patients,
        counts=counts,
        criteria=criteria,
        consensus=consensus,
        consensus_patients=kept,
        assignments=assignments,
        resample_labels=resample_labels,
        baseline_labels=baseline_labels,
        baselines=pd.DataFrame(baseline_rows),
        partitions=pd.DataFrame.from_dict(partitions, orient="index").rename_axis("count"),
        flow=_flows(counts, assignments),
        models={fit.count: fit.model for fit in fits},
        recommendation=recommendation,
        settings=settings,
        unconverged=resample_unconverged + sum(fit.unconverged for fit in fits),
    )


def _silhouette(embedding: np.ndarray, labels: np.ndarray) -> float:
    """Mean silhouette in the spectral embedding of the fused graph (NaN for a single group),
    over a seeded sample of SILHOUETTE_SIDE patients in a larger cohort."""
    if np.unique(labels).size < 2:
        return float("nan")
    sample = SILHOUETTE_SIDE if len(labels) > SILHOUETTE_SIDE else None
    return float(silhouette_score(embedding, labels, sample_size=sample, random_state=0))


def _flows(counts: list[int], assignments: dict[int, pd.DataFrame]) -> pd.DataFrame:
    """Split flow from each swept count k to k + 1 (when both were swept)."""
    tables = [
        split_flow(assignments[k]["subtype"], assignments[k + 1]["subtype"]).assign(count=k)
        for k in counts
        if k + 1 in assignments
    ]
    columns = ["count", "source", "target", "patients", "share_of_from"]
    if not tables:
        return pd.DataFrame(columns=columns)
    flows = pd.concat(tables, ignore_index=True)
    return flows.rename(columns={"from_subtype": "source", "to_subtype": "target"})[columns]
