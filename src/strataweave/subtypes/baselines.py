"""Simple alternatives run in the same sweep: does the joint model beat them on this cohort?

- spectral clustering of the fused patient graph (scikit-learn, precomputed affinity);
- k-means on the modalities concatenated after scaling each feature, each modality's block
  divided by the square root of its feature count so every modality weighs the same, and
  a patient missing a modality placed at its mean (zero after scaling).
"""

from __future__ import annotations

import warnings

import numpy as np
import scipy.sparse as sp
from sklearn.cluster import KMeans
from sklearn.manifold import spectral_embedding

from strataweave.graph import eigen_solver

BASELINE_METHODS = {
    "spectral": "spectral clustering on the fused graph",
    "kmeans": "k-means on the concatenated scaled modalities",
}
KMEANS_STARTS = 10


def codes_by_size(labels: np.ndarray) -> np.ndarray:
    """Relabel 0..k-1 from the largest group to the smallest (ties: lower old label first)."""
    groups, codes, sizes = np.unique(labels, return_inverse=True, return_counts=True)
    order = np.lexsort((np.arange(groups.size), -sizes))
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    return rank[codes]


def concatenated_scaled(views: list[np.ndarray]) -> np.ndarray:
    """Patients x all-features matrix: z-scored columns, equal weight per modality, missing = 0."""
    blocks = []
    for values in views:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN columns of absent patients
            centre = np.nanmean(values, axis=0)
            spread = np.nanstd(values, axis=0)
        spread = np.where(np.isfinite(spread) & (spread > 0), spread, 1.0)
        scaled = np.nan_to_num((values - centre) / spread, nan=0.0)
        blocks.append(scaled / np.sqrt(values.shape[1]))
    return np.hstack(blocks)


def spectral_labels(affinity: sp.csr_matrix, count: int, random_state: int) -> np.ndarray:
    """Spectral clustering of the precomputed affinity, subtypes numbered by size."""
    return graph_partitions(affinity, [count], random_state)[count]


def graph_partitions(affinity: sp.csr_matrix, counts, random_state: int) -> dict[int, np.ndarray]:
    """Spectral clustering of the affinity at every count from one embedding, subtypes numbered by size.

    The steps of scikit-learn's SpectralClustering (Laplacian eigenmap, then k-means on its
    first `count` coordinates), with the eigenvectors computed once for the largest count.
    """
    counts = list(counts)
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=".*not fully connected.*")
        maps = spectral_embedding(affinity, n_components=max(counts), eigen_solver=eigen_solver(affinity.shape[0]),
                                  random_state=random_state, drop_first=False)
    return {
        count: codes_by_size(KMeans(count, n_init=KMEANS_STARTS, random_state=random_state).fit_predict(maps[:, :count]))
        for count in counts
    }


def kmeans_labels(features: np.ndarray, count: int, random_state: int) -> np.ndarray:
    """k-means with several seeded starts, subtypes numbered by size."""
    model = KMeans(count, n_init=KMEANS_STARTS, random_state=random_state)
    return codes_by_size(model.fit_predict(features))
