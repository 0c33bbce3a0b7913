"""Spectral views of a patient graph: a low-dimensional embedding for plots and eigengaps.

Both use the symmetric normalised Laplacian L = I - D^-1/2 A D^-1/2 (von Luxburg 2007,
Statistics and Computing 17:395). Its number of eigenvalues near zero counts the clusters,
so the largest gap between consecutive small eigenvalues hints at the number of subtypes.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.sparse.linalg import eigsh

from strataweave.errors import InputError
from strataweave.graph.laplacian import degrees, laplacian

# Up to this many patients the eigenproblem is solved densely (exact and robust).
DENSE_LIMIT = 1500


def _normalised_adjacency(affinity: sp.spmatrix) -> tuple[sp.csr_matrix, np.ndarray]:
    affinity = sp.csr_matrix(affinity, dtype=np.float64)
    deg = degrees(affinity)
    with np.errstate(divide="ignore"):
        inv_sqrt = np.where(deg > 0, 1.0 / np.sqrt(deg), 0.0)
    return (sp.diags(inv_sqrt) @ affinity @ sp.diags(inv_sqrt)).tocsr(), inv_sqrt


def _top_eigenpairs(matrix: sp.csr_matrix, count: int) -> tuple[np.ndarray, np.ndarray]:
    """The `count` largest eigenvalues (descending) of a symmetric matrix and their vectors."""
    n = matrix.shape[0]
    if n <= DENSE_LIMIT or count >= n - 1:
        values, vectors = np.linalg.eigh(matrix.toarray())
        return values[::-1][:count], vectors[:, ::-1][:, :count]
    start = np.random.default_rng(0).uniform(0.5, 1.5, size=n)
    values, vectors = eigsh(matrix, k=count, which="LA", v0=start)
    order = np.argsort(values)[::-1]
    return values[order], vectors[:, order]


def _check_count(name: str, count, n: int) -> None:
    if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or not 1 <= count < n:
        raise InputError(f"{name}: found {count!r} for a graph of {n} patients; expected 1 to {n - 1}")


def spectral_embedding(affinity: sp.spmatrix, n_dims: int = 2) -> np.ndarray:
    """n x n_dims coordinates: the first non-trivial eigenvectors of the normalised Laplacian.

    Vectors are scaled by D^-1/2 (patients without edges sit at 0) and each is signed so
    that its largest absolute entry is positive, so the picture is reproducible.
    """
    n = affinity.shape[0]
    _check_count("n_dims", n_dims, n)
    normalised, inv_sqrt = _normalised_adjacency(affinity)
    _, vectors = _top_eigenpairs(normalised, n_dims + 1)
    embedding = vectors[:, 1:] * inv_sqrt[:, None]
    signs = np.sign(embedding[np.argmax(np.abs(embedding), axis=0), np.arange(n_dims)])
    return embedding * np.where(signs == 0, 1.0, signs)


def eigengaps(affinity: sp.spmatrix, max_count: int) -> pd.DataFrame:
    """Smallest normalised-Laplacian eigenvalues and gaps, one row per subtype count 1..max_count.

    `gap` at count k is lambda_(k+1) - lambda_k; the count with the largest gap is the hint.
    A patient without edges counts as a component of its own (eigenvalue 0), as in `laplacian`.
    """
    n = affinity.shape[0]
    _check_count("max_count", max_count, n)
    complement = sp.identity(n, format="csr") - laplacian(affinity, normalised=True)
    top, _ = _top_eigenpairs(complement, max_count + 1)
    eigenvalues = np.clip(1.0 - top, 0.0, 2.0)
    counts = pd.RangeIndex(1, max_count + 1, name="count")
    return pd.DataFrame({"eigenvalue": eigenvalues[:-1], "gap": np.diff(eigenvalues)}, index=counts)
