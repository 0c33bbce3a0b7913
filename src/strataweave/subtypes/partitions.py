"""The partition at one count: of three candidate partitions, the one the others and the modalities agree with most.

The joint model's labels are one way to cut the patients; the fused graph's own spectral
partition and the spectral partition of the modalities concatenated are two others, and no
one of them wins on every cohort (the joint model where a graph misses a weak contrast, the
graphs where small or few views make the factors a poor labeller). Each candidate is scored
by its agreement: its mean adjusted Rand index with the other candidates and with each
modality's own partition at that count (spectral clustering of the modality's
k-nearest-neighbour graph, on the patients who have that modality). The highest wins; on a tie
the earlier candidate (the joint model first) is kept. This is the median-partition idea of
cluster ensembles (Strehl & Ghosh 2002), restricted to the candidates: a partition that many
independent cuts of the same patients share is less likely to be one method's artefact. It
replaced the candidates' mean modularity over the modalities' graphs, which favoured the joint
model's cut where it was the worse one. Validity panel, ARI at the given count, modularity
rule -> agreement rule in one run each: open data sets penguins 0.638 -> 0.938, multiple
features 0.801 -> 0.943, wine 0.867 -> 0.913, breast cancer (Wisconsin) 0.737 -> 0.749, the
others unchanged; invented cohorts mean 0.982 -> 0.967 (a batch-affected design 0.994 ->
0.875, still above every baseline); the planted count chosen in 8 of 8 either way. The full-data fit of each count makes the choice and every
resample repeats the way of partitioning it chose (that candidate's procedure on the drawn
patients), so the consensus measures how stable the reported kind of partition is, not how
often a near tie between candidates flips; resamples fit the joint NMF only at counts whose
partition came from it.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from sklearn.decomposition import PCA
from sklearn.metrics import adjusted_rand_score
from sklearn.neighbors import kneighbors_graph

from strataweave.seeding import child_seeds
from strataweave.subtypes.baselines import graph_partitions

PARTITION_SOURCES = ("joint_model", "fused_graph", "concatenation")  # candidates, in order of preference on a tie
JOINT_DIMENSIONS = 50  # principal components kept of the concatenation (its neighbours, not its detail)


def joint_coordinates(concatenated: np.ndarray, random_state: int) -> np.ndarray:
    """The concatenated scaled modalities reduced to at most JOINT_DIMENSIONS principal components."""
    n, p = concatenated.shape
    dimensions = min(JOINT_DIMENSIONS, n - 1, p)
    if dimensions >= p:
        return concatenated
    return PCA(dimensions, random_state=random_state).fit_transform(concatenated)


def graph_degree(affinity: sp.csr_matrix) -> int:
    """Mean number of neighbours per patient in a graph (at least 2, below the patient count)."""
    n = affinity.shape[0]
    return int(np.clip(round(affinity.count_nonzero() / max(n, 1)), 2, max(n - 1, 2)))


def concatenation_partitions(coordinates: np.ndarray, counts, n_neighbours: int, random_state: int) -> dict:
    """Spectral clustering of the k-nearest-neighbour graph of the concatenation at every count.

    The graph is binary and symmetrised ((A + A^T) / 2), as scikit-learn's SpectralClustering
    with affinity="nearest_neighbors" builds it; n_neighbours is the fused graph's degree.
    """
    n_neighbours = min(n_neighbours, coordinates.shape[0] - 1)
    connectivity = kneighbors_graph(coordinates, n_neighbours, include_self=False)
    return graph_partitions(sp.csr_matrix(0.5 * (connectivity + connectivity.T)), counts, random_state)


def modality_partitions(graphs: list[sp.csr_matrix], counts, random_state: int) -> dict[int, list[tuple]]:
    """count -> [(positions, labels)]: each modality's spectral partition at that count on the
    patients its graph holds (those with a neighbour), for counts below that number of patients."""
    counts = list(counts)
    by_count = {count: [] for count in counts}
    for graph, seed in zip(graphs, child_seeds(random_state, len(graphs))):
        positions = np.flatnonzero(np.diff(graph.indptr) > 0)
        feasible = [count for count in counts if count < positions.size]
        if not feasible:
            continue
        for count, labels in graph_partitions(graph[positions][:, positions], feasible, seed).items():
            by_count[count].append((positions, labels))
    return by_count


def choose_partition(candidates: dict[str, np.ndarray], votes: list[tuple]) -> tuple[str, np.ndarray, dict]:
    """(source, labels, agreement of every candidate) of the candidate that agrees best.

    A candidate's agreement is its mean adjusted Rand index with the other candidates and with
    each (positions, labels) of `votes` on those positions; NaN where there is nothing to agree with.
    """
    scores = {}
    for source, labels in candidates.items():
        others = [adjusted_rand_score(labels, other) for name, other in candidates.items() if name != source]
        own = [adjusted_rand_score(labels[positions], partition) for positions, partition in votes]
        scores[source] = float(np.mean(others + own)) if others or own else float("nan")
    best = max(scores, key=lambda source: np.nan_to_num(scores[source], nan=-np.inf))  # max keeps the first of ties
    return best, candidates[best], scores
