"""Turning distances into affinities in [0, 1].

`scaled_exponential` is the kernel of Wang et al. 2014 (Nature Methods 11:333): the width for
a pair is eps_ij = (s_i + s_j + d_ij) / 3, where s_i is patient i's mean distance to its k
nearest neighbours. The paper writes the exponent as d^2 / (mu * eps); we use the
dimensionally consistent d^2 / (2 (mu * eps)^2), a Gaussian of width mu * eps, so rescaling a
modality leaves its graph unchanged. `gaussian` is the plain kernel with one bandwidth h:
exp(-d^2 / (2 h^2)).
"""

from __future__ import annotations

import numpy as np

KERNELS = ("scaled_exponential", "gaussian")


def local_scales(neighbour_distances: np.ndarray) -> np.ndarray:
    """Each patient's mean distance to its k nearest neighbours (rows of an n x k array)."""
    return neighbour_distances.mean(axis=1)


def scaled_exponential(distances, scale_left, scale_right, spread: float = 0.5) -> np.ndarray:
    """exp(-d^2 / (2 (spread * eps)^2)) with eps = (s_left + s_right + d) / 3; 1 where eps = 0."""
    width = spread * (np.asarray(scale_left) + np.asarray(scale_right) + distances) / 3.0
    ratio = np.divide(distances, width, out=np.zeros_like(width, dtype=np.float64), where=width > 0)
    return np.exp(-0.5 * ratio**2)


def gaussian(distances, bandwidth: float) -> np.ndarray:
    """exp(-d^2 / (2 h^2)) with one bandwidth h for all pairs."""
    return np.exp(-0.5 * (np.asarray(distances, dtype=np.float64) / bandwidth) ** 2)


def default_bandwidth(neighbour_distances: np.ndarray) -> float:
    """Median distance to the k nearest neighbours (common practice); 1.0 if that is 0."""
    median = float(np.median(neighbour_distances))
    return median if median > 0 else 1.0
