"""fuse_modalities: per-modality patient graphs fused by a rule, without any N x N array.

Order matters: the kernel values are fused first and the graph is cut to each patient's k
strongest fused edges after. The candidate pairs are the union of every modality's
k-nearest-neighbour lists; every modality's kernel is evaluated on all of them.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from strataweave.errors import InputError
from strataweave.graph.checks import check_overlap, checked_matrix, metric_per_modality
from strataweave.graph.diffusion import diffuse
from strataweave.graph.kernels import KERNELS, default_bandwidth, gaussian, local_scales, scaled_exponential
from strataweave.graph.metrics import METRICS, paired_distances, prepare_rows
from strataweave.graph.neighbours import APPROXIMATE_ABOVE, SEARCHES, check_search, chosen_search, find_neighbours
from strataweave.graph.pairs import neighbour_pairs, pair_codes, strongest_pairs, symmetric_matrix, unique_pairs
from strataweave.graph.patient_graph import PatientGraph
from strataweave.graph.rule_choice import choose_rule, rule_candidates
from strataweave.graph.rules import RULES, check_quorum, combine_values
from strataweave.parameters import Parameter, check_parameters, choice, integer, number
from strataweave.seeding import child_seeds


#: fuse_modalities' parameters: rule, default (the same as the signature's, tested) and help; the
#: function checks them once, GraphFusion passes its own through, the workflow's [graph] keys read them.
PARAMETERS = {
    "rule": Parameter(choice(*RULES), "auto", "how the modality graphs are fused; auto: the intersection, a quorum "
                      "or the average, whichever graph the modalities themselves confirm most"),
    "quorum": Parameter(integer(1), None, "modalities that must agree (rule = quorum)"),
    "n_neighbours": Parameter(integer(2), 20, "neighbours kept per patient"),
    "metric": Parameter(choice(*METRICS), "euclidean", "distance between patients (in Python also one per modality)"),
    "kernel": Parameter(choice(*KERNELS), "scaled_exponential", "how distances become affinities"),
    "kernel_spread": Parameter(number(above=0), 0.5, "width of the scaled exponential kernel, in local scales"),
    "bandwidth": Parameter(number(above=0), None, "width of the gaussian kernel (default: per modality, the "
                           "median k-nearest-neighbour distance)"),
    "diffusion_neighbours": Parameter(integer(1), None, "neighbours of the diffusion rule (default: n_neighbours)"),
    "diffusion_iterations": Parameter(integer(1), 20, "iterations of the diffusion rule"),
    "neighbour_search": Parameter(
        choice(*SEARCHES), "auto",
        f"auto: approximate (pynndescent, seeded from random_state, the run's seed) for a modality of more than "
        f"{APPROXIMATE_ABOVE} patients when installed, exact otherwise",
    ),
}


@dataclass(frozen=True)
class _ModalityKernel:
    """What one modality needs to evaluate its kernel on any pair of its patients."""

    positions: np.ndarray  # global position of each of its patients
    scales: np.ndarray  # local scale per patient
    bandwidth: float
    own_codes: np.ndarray  # its own nearest-neighbour pairs (global pair codes, sorted) ...
    own_distances: np.ndarray  # ... and their distances, reused when the pairs are fused

    def values(self, local_left, local_right, distances, kernel: str, spread: float) -> np.ndarray:
        """Kernel values for pairs of its patients (local positions) at the given distances."""
        if kernel == "gaussian":
            return gaussian(distances, self.bandwidth)
        return scaled_exponential(distances, self.scales[local_left], self.scales[local_right], spread)


def fuse_modalities(
    data: Mapping[str, pd.DataFrame],
    rule: str = "auto",
    quorum: int | None = None,
    n_neighbours: int = 20,
    metric: str | Mapping[str, str] = "euclidean",
    kernel: str = "scaled_exponential",
    kernel_spread: float = 0.5,
    bandwidth: float | None = None,
    diffusion_neighbours: int | None = None,
    diffusion_iterations: int = 20,
    neighbour_search: str = "auto",
    random_state: int | None = None,
    progress: Callable[[int], None] | None = None,
) -> PatientGraph:
    """One sparse patient graph from several modalities (patients x features DataFrames).

    rule: `auto` (the intersection, a quorum or the average, whichever the modalities
    confirm most: see `rule_choice`), `intersection` (minimum over the modalities a pair
    shares), `quorum` (the quorum-th largest), `average` (mean) or `diffusion` (cross-network
    diffusion, with `diffusion_neighbours` (default n_neighbours) and `diffusion_iterations`).
    kernel: `scaled_exponential` (local scales, width `kernel_spread`) or `gaussian`
    (one `bandwidth` per modality, default the median k-nearest-neighbour distance).
    neighbour_search: `exact`, `approximate` (needs pynndescent; seeded per modality from
    `random_state`) or `auto` (approximate for a modality of more than APPROXIMATE_ABOVE
    patients when pynndescent is installed, exact otherwise).
    A patient missing a modality has no edges in that modality's graph. Patients the rule
    leaves without an edge are connected to their k strongest pairs of the average graph
    and listed in `fallback_patients`. `progress` is called with the number of finished
    modality passes (two per modality).
    """
    if not isinstance(data, Mapping) or not data:
        raise InputError(f"modalities: found {type(data).__name__} {data!r:.40}; expected a non-empty dict of DataFrames")
    names = [str(name) for name in data]
    frames = dict(zip(names, data.values()))
    given = dict(rule=rule, quorum=quorum, n_neighbours=n_neighbours, kernel=kernel, kernel_spread=kernel_spread,
                 bandwidth=bandwidth, diffusion_neighbours=diffusion_neighbours,
                 diffusion_iterations=diffusion_iterations, neighbour_search=neighbour_search)
    check_parameters(PARAMETERS, given if isinstance(metric, Mapping) else {**given, "metric": metric})
    check_quorum(rule, quorum, len(names))
    check_search(neighbour_search)
    metrics = metric_per_modality(metric, names)
    matrices = {name: checked_matrix(name, frames[name], metrics[name], n_neighbours) for name in names}
    check_overlap({name: frames[name].index for name in names})
    patients = _union_in_order([frames[name].index for name in names])
    n = len(patients)

    report = _pass_counter(progress)
    searches = {name: chosen_search(neighbour_search, len(matrices[name])) for name in names}
    seeds = dict(zip(names, child_seeds(random_state, len(names))))
    kernels: dict[str, _ModalityKernel] = {}
    modality_graphs = {}
    for name in names:
        kernels[name], modality_graphs[name] = _modality_pass(
            matrices[name], metrics[name], patients.get_indexer(frames[name].index), n, n_neighbours,
            kernel, kernel_spread, bandwidth, searches[name], seeds[name],
        )
        report()

    candidates = np.unique(np.concatenate([kernels[name].own_codes for name in names]))
    left, right = candidates // n, candidates % n
    values = np.full((len(left), len(names)), np.nan)
    for column, name in enumerate(names):
        values[:, column] = _kernel_on_pairs(matrices[name], metrics[name], kernels[name], left, right, n,
                                             kernel, kernel_spread)
        report()

    presence = pd.DataFrame({name: patients.isin(frames[name].index) for name in names}, index=patients)
    confirmed = np.column_stack([np.isin(candidates, kernels[name].own_codes) for name in names])

    def build(rule, quorum):
        if rule == "diffusion":
            fused = diffuse(left, right, values, presence.to_numpy(), diffusion_neighbours or n_neighbours,
                            diffusion_iterations)
        else:
            fused = combine_values(values, rule, quorum)
        return _sparsified_with_fallback(left, right, fused, values, n, n_neighbours)

    requested = rule
    rules_tried = rule_candidates(len(names)) if rule == "auto" else [(rule, quorum)]
    rule, quorum, (weights, fallback), evidence = choose_rule(rules_tried, build, confirmed, names)
    keep = weights > 0
    return PatientGraph(
        patients=patients,
        affinity=symmetric_matrix(left[keep], right[keep], weights[keep], n),
        rule=rule,
        fallback_patients=patients[fallback],
        modality_graphs=modality_graphs,
        presence=presence,
        rule_evidence=evidence,
        parameters={
            "rule": rule, "quorum": quorum, "rule_requested": requested, "n_neighbours": int(n_neighbours),
            "metric": metrics,
            "kernel": kernel, "kernel_spread": kernel_spread,
            "bandwidth": {name: float(kernels[name].bandwidth) for name in names} if kernel == "gaussian" else None,
            "diffusion_neighbours": (diffusion_neighbours or n_neighbours) if rule == "diffusion" else None,
            "diffusion_iterations": diffusion_iterations if rule == "diffusion" else None,
            "neighbour_search": searches, "neighbour_search_requested": neighbour_search,
            "approximate_above": APPROXIMATE_ABOVE,
        },
    )


def _pass_counter(progress: Callable[[int], None] | None) -> Callable[[], None]:
    """A callable that reports 1, 2, 3, ... finished passes to `progress`, if there is one."""
    passes = itertools.count(1)
    return (lambda: progress(next(passes))) if progress is not None else (lambda: None)


def _union_in_order(indexes: list[pd.Index]) -> pd.Index:
    """All patients, in order of first appearance across the modalities."""
    combined = pd.Index(np.concatenate([index.to_numpy(dtype=object) for index in indexes]))
    return pd.Index(combined[~combined.duplicated()], name="patient_id")


def _modality_pass(matrix, metric, positions, n, n_neighbours, kernel, spread, bandwidth, search, seed):
    """Nearest neighbours of one modality (by `search`) and its own k-nearest-neighbour kernel graph."""
    neighbours, distances = find_neighbours(prepare_rows(matrix, metric), n_neighbours, search, seed)
    own_rows, own_cols = neighbour_pairs(positions, neighbours)
    own_left, own_right, source = unique_pairs(own_rows, own_cols, n)
    modality = _ModalityKernel(
        positions=positions,
        scales=local_scales(distances),
        bandwidth=bandwidth if bandwidth is not None else default_bandwidth(distances),
        own_codes=pair_codes(own_left, own_right, n),
        own_distances=distances.ravel()[source],
    )
    local = _local_positions(positions, n)
    own_values = modality.values(local[own_left], local[own_right], modality.own_distances, kernel, spread)
    return modality, symmetric_matrix(own_left, own_right, own_values, n)


def _local_positions(positions: np.ndarray, n: int) -> np.ndarray:
    """Row of each patient in the modality's matrix, -1 where the patient lacks it."""
    local = np.full(n, -1, dtype=np.int64)
    local[positions] = np.arange(len(positions))
    return local


def _kernel_on_pairs(matrix, metric, modality: _ModalityKernel, left, right, n, kernel, spread) -> np.ndarray:
    """Kernel value of one modality on every candidate pair; NaN where a patient lacks it.

    Distances of the modality's own neighbour pairs are reused; only the others are computed.
    """
    local = _local_positions(modality.positions, n)
    a, b = local[left], local[right]
    both = (a >= 0) & (b >= 0)
    a, b = a[both], b[both]
    codes = pair_codes(left[both], right[both], n)
    at = np.minimum(np.searchsorted(modality.own_codes, codes), len(modality.own_codes) - 1)
    known = modality.own_codes[at] == codes
    distances = np.empty(len(codes))
    distances[known] = modality.own_distances[at[known]]
    distances[~known] = paired_distances(prepare_rows(matrix, metric), a[~known], b[~known])
    out = np.full(len(left), np.nan)
    out[both] = modality.values(a, b, distances, kernel, spread)
    return out


def _sparsified_with_fallback(left, right, fused, values, n, n_neighbours) -> tuple[np.ndarray, np.ndarray]:
    """Edge weight per candidate pair after the k-strongest cut, and the fallback patient mask."""
    keep = strongest_pairs(left, right, fused, n, n_neighbours)
    weights = np.where(keep, fused, 0.0)
    has_edge = np.zeros(n, dtype=bool)
    has_edge[left[keep]] = True
    has_edge[right[keep]] = True
    lonely = ~has_edge
    if not lonely.any():
        return weights, lonely
    average = combine_values(values, "average")
    added = strongest_pairs(left, right, average, n, n_neighbours, only=lonely) & ~keep
    return np.where(added, average, weights), lonely
