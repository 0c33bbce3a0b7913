"""Sparse graph Laplacians of a symmetric non-negative affinity matrix."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp


def degrees(affinity: sp.spmatrix) -> np.ndarray:
    """Row sums of the affinity matrix as a flat float array."""
    return np.asarray(affinity.sum(axis=1)).ravel()


def laplacian(affinity: sp.spmatrix, normalised: bool = False) -> sp.csr_matrix:
    """L = D - A, or the symmetric normalised I - D^-1/2 A D^-1/2 (isolated nodes get L_ii = 0)."""
    affinity = sp.csr_matrix(affinity, dtype=np.float64)
    deg = degrees(affinity)
    if not normalised:
        return (sp.diags(deg) - affinity).tocsr()
    with np.errstate(divide="ignore"):
        inv_sqrt = np.where(deg > 0, 1.0 / np.sqrt(deg), 0.0)
    scaled = sp.diags(inv_sqrt) @ affinity @ sp.diags(inv_sqrt)
    return (sp.diags((deg > 0).astype(float)) - scaled).tocsr()
