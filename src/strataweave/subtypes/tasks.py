"""The independent tasks of a sweep: one full-data fit per count, one resample across counts.

Both are module-level functions of (shared inputs, task) so that any backend can ship them.
Every random choice comes from the task's own seed, so results do not depend on where or in
which order the tasks run.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from sklearn.exceptions import ConvergenceWarning

from strataweave.factorize import JointNMF, label_patients, partition_factor, scores_for_labels
from strataweave.graph import modularity
from strataweave.seeding import child_seeds
from strataweave.subtypes.baselines import graph_partitions, kmeans_labels
from strataweave.subtypes.consensus import NOT_DRAWN
from strataweave.subtypes.partitions import choose_partition, concatenation_partitions
from strataweave.subtypes.settings import SweepSettings


@dataclass(frozen=True)
class SweepInputs:
    """What every task reads: modalities (name -> patients x features, all-NaN rows for a
    missing modality), the fused affinity, the counts, JointNMF keyword arguments, the
    sweep settings, the scaled concatenation for the k-means baseline, its principal
    coordinates and the neighbour count for the concatenation partition, the graphs whose mean
    modularity the criteria report (each modality's own), each modality's own partition per count
    (which vote on the candidate partitions, see `partitions`), for warm starts the
    full-data factors per count, and for the resamples the candidate each count's full-data
    fit took (see `partitions`)."""

    views: dict[str, np.ndarray]
    affinity: sp.csr_matrix
    counts: list[int]
    factorization: dict
    settings: SweepSettings
    concatenated: np.ndarray
    joint: np.ndarray
    joint_neighbours: int
    modality_graphs: list[sp.csr_matrix]
    modality_partitions: dict[int, list[tuple[np.ndarray, np.ndarray]]]
    warm_factors: dict[int, tuple[np.ndarray, list[np.ndarray]]] | None = None
    sources: dict[int, str] | None = None


@dataclass
class FullFit:
    """The full-data fit at one count: model, labels (and which candidate partition they are,
    with every candidate's agreement, and their mean modularity on the modalities' graphs),
    confidence, scores, baseline labels."""

    count: int
    model: JointNMF
    labels: np.ndarray
    source: str
    agreement: dict[str, float]
    modularity: float
    confidence: np.ndarray
    scores: np.ndarray
    baseline_labels: dict[str, np.ndarray]
    unconverged: int


@dataclass
class ResampleFit:
    """One resample: labels per count (counts x patients, NOT_DRAWN where not drawn)."""

    labels: np.ndarray
    unconverged: int


def _fit_and_label(views, affinity, count, factorization, seed, warm=None):
    """JointNMF at `count` and its own labels; also how many fits stopped at max_iter."""
    nmf_seed, label_seed = child_seeds(seed, 2)
    model = JointNMF(n_components=count, random_state=nmf_seed, **factorization)
    W_init, H_init = warm if warm is not None else (None, None)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        model.fit(views, graph=affinity, W_init=W_init, H_init=H_init)
    unconverged = sum(issubclass(w.category, ConvergenceWarning) for w in caught)
    labels, _, _ = label_patients(model.patient_factor_, count, random_state=label_seed)
    return model, labels, unconverged


def _candidates(settings: SweepSettings, model_labels, graph_partition, concatenation) -> dict[str, np.ndarray]:
    """The candidate partitions `settings.labels_from` admits (`concatenation` is called only if needed)."""
    candidates = {"joint_model": model_labels, "fused_graph": graph_partition}
    if settings.labels_from in ("best_fit", "concatenation"):
        candidates["concatenation"] = concatenation()
    if settings.labels_from == "best_fit":
        return candidates
    return {settings.labels_from: candidates[settings.labels_from]}


def _start(settings: SweepSettings, partition: np.ndarray, count: int, warm=None):
    """(W_init, H_init) of one fit: warm factors, the graph's partition, or neither (the model's own init)."""
    if warm is not None:
        return warm
    if settings.start_from == "graph":
        return partition_factor(partition, count), None
    return None


def fit_full_data(shared: SweepInputs, task: tuple[int, int]) -> FullFit:
    """Joint NMF on all patients at one count, the chosen partition, and the two baselines at that count."""
    count, seed = task
    fit_seed, spectral_seed, kmeans_seed, joint_seed = child_seeds(seed, 4)
    spectral = graph_partitions(shared.affinity, [count], spectral_seed)[count]
    model, model_labels, unconverged = _fit_and_label(
        shared.views, shared.affinity, count, shared.factorization, fit_seed, _start(shared.settings, spectral, count)
    )
    candidates = _candidates(
        shared.settings, model_labels, spectral,
        lambda: concatenation_partitions(shared.joint, [count], shared.joint_neighbours, joint_seed)[count],
    )
    source, labels, agreement = choose_partition(candidates, shared.modality_partitions[count])
    quality = float(np.mean([modularity(graph, labels) for graph in shared.modality_graphs]))
    confidence, scores = scores_for_labels(model.patient_factor_, labels, count)
    baselines = {"spectral": spectral, "kmeans": kmeans_labels(shared.concatenated, count, kmeans_seed)}
    return FullFit(count, model, labels, source, agreement, quality, confidence, scores, baselines, unconverged)


def _draw(rng: np.random.Generator, size: int, fraction: float, at_least: int) -> np.ndarray:
    """Sorted positions of round(fraction * size) items (never fewer than `at_least`)."""
    keep = min(size, max(at_least, math.ceil(fraction * size)))
    return np.sort(rng.choice(size, size=keep, replace=False))


def fit_resample(shared: SweepInputs, task: tuple[int, int]) -> ResampleFit:
    """Draw patients (and features), restrict the graph to them and partition them at every
    count the way the full-data fit of that count did (`shared.sources`); the joint NMF is
    fitted only at counts whose full-data partition came from it.

    Seed layout: child 0 draws the resample, child k seeds count k, so the draw does not
    depend on the counts and a count's fit does not depend on the other counts; the graph
    partitions (one embedding for all counts) take child max(counts) + 1 and the
    concatenation partitions child max(counts) + 2.
    """
    _, seed = task
    settings, counts = shared.settings, shared.counts
    seeds = child_seeds(seed, max(counts) + 3)
    rng = np.random.default_rng(seeds[0])
    n_patients = shared.affinity.shape[0]
    rows = _draw(rng, n_patients, settings.fraction, max(counts) + 1)
    columns = {
        name: _draw(rng, values.shape[1], settings.feature_fraction, max(counts) + 1)
        for name, values in shared.views.items()
    }
    views = {name: values[rows][:, columns[name]] for name, values in shared.views.items()}
    affinity = shared.affinity[rows][:, rows]
    factorization = {**shared.factorization, "n_restarts": settings.resample_restarts}
    labels = np.full((len(counts), n_patients), NOT_DRAWN, dtype=np.int16)
    partitions = graph_partitions(affinity, counts, seeds[max(counts) + 1])
    concatenation = {}

    def concatenation_at(count):
        if not concatenation:
            concatenation.update(
                concatenation_partitions(shared.joint[rows], counts, shared.joint_neighbours, seeds[max(counts) + 2])
            )
        return concatenation[count]

    unconverged = 0
    for position, count in enumerate(counts):
        source = shared.sources[count]
        if source == "fused_graph":
            labels[position, rows] = partitions[count]
            continue
        if source == "concatenation":
            labels[position, rows] = concatenation_at(count)
            continue
        warm = None
        if shared.warm_factors is not None:
            W, loadings = shared.warm_factors[count]
            warm = (W[rows], [H[:, columns[name]] for name, H in zip(views, loadings)])
        start = _start(settings, partitions[count], count, warm)
        _, model_labels, stopped = _fit_and_label(views, affinity, count, factorization, seeds[count], start)
        labels[position, rows] = model_labels
        unconverged += stopped
    return ResampleFit(labels, unconverged)
