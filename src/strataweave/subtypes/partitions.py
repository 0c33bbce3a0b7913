"""The partition at one count: of three candidate partitions, the one the modalities' own graphs fit best.

The joint model's labels are one way to cut the patients; the fused graph's own spectral
partition and the spectral partition of the modalities concatenated are two others, and no
one of them wins on every cohort (the joint model where a graph misses a weak contrast, the
graphs where small or few views make the factors a poor labeller). Each candidate is scored
by its mean modularity (Newman 2006) over the modalities' own k-nearest-neighbour graphs,
each on the patients who have that modality, and the highest wins; on a tie the earlier
candidate (the joint model first) is kept. The modalities' graphs, not the fused one, judge:
the fused graph's own spectral cut is one of the candidates, and the fused graph's modularity
favoured it where it was the worse partition (on three fresh draws of the validity panel's
eight invented designs, mean ARI at the planted count 0.920 judged on the fused graph, 0.948
on the modalities' graphs, the best candidate each time 0.948; on the eight open data sets
0.592 against 0.545). The full-data fit of each count makes the choice and every resample
repeats the way of partitioning it chose (that candidate's procedure on the drawn patients),
so the consensus measures how stable the reported kind of partition is, not how often a near
tie between candidates flips; resamples fit the joint NMF only at counts whose partition came
from it.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from sklearn.decomposition import PCA
from sklearn.neighbors import kneighbors_graph

from strataweave.graph import modularity
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


def choose_partition(graphs: list[sp.csr_matrix], candidates: dict[str, np.ndarray]) -> tuple[str, np.ndarray, dict]:
    """(source, labels, mean modularity over `graphs` of every candidate) of the candidate whose mean is highest."""
    scores = {source: float(np.mean([modularity(graph, labels) for graph in graphs]))
              for source, labels in candidates.items()}
    best = max(scores, key=scores.get)  # max keeps the first of equal scores
    return best, candidates[best], scores
