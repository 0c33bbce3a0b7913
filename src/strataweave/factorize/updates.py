"""Multiplicative updates of the graph-regularised joint NMF and the outer iteration.

Objective, with s_k = sum_v alpha_v ||H_v[k, :]||^2 the weighted loading norm of component k:

    J = sum_v alpha_v ||M_v o (X_v - W H_v)||_F^2  +  lambda * sum_k s_k w_k^T L w_k

The loadings are renormalised to s_k = 1 every iteration (W rescaled to keep W H_v), where
J is the usual lambda * tr(W^T L W) form; writing the graph term with s_k makes J invariant
to that rescaling, so the renormalisation neither raises J nor lets W shrink to cheat the
graph term. Every update is a majorise-minimise step (Lee & Seung 2001; Cai et al. 2011,
with the majoriser noted in `smoothness`), so J never increases.

Speed (Gillis & Glineur 2012): each outer iteration makes two passes over the data, X H^T
for the W step and W^T X for the H step, and repeats the cheap inner updates on them until
their change falls below `INNER_STOP` times the first change, or `n_updates` times.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache

import numpy as np
from threadpoolctl import ThreadpoolController

from strataweave.factorize.smoothness import GraphSmoothness
from strataweave.factorize.views import ViewBlock

INNER_STOP = 0.1  # inner updates stop once a step moves less than this share of the first step
PATIENCE = 3  # converged after this many consecutive iterations with relative decrease below tol


@dataclass
class FitResult:
    """One fit's outcome: patient factor, loadings per modality, objective per iteration,
    squared error per modality, and whether the tolerance (not max_iter) ended it."""

    W: np.ndarray
    loadings: list[np.ndarray]
    objective: list[float]
    squared_errors: list[float]
    converged: bool


@cache
def _blas_controller() -> ThreadpoolController:
    return ThreadpoolController()


def single_threaded_blas():
    """Context for everything but the passes over X: small products gain nothing from BLAS
    threads and lose much to thread hand-offs when the cores are busy (7x measured on a
    loaded 2-core machine); the passes keep the caller's thread setting."""
    return _blas_controller().limit(limits=1, user_api="blas")


def _safe_ratio(numerator: np.ndarray, denominator: np.ndarray) -> np.ndarray:
    return numerator / np.maximum(denominator, np.finfo(denominator.dtype).tiny)


def loading_norms(blocks: list[ViewBlock], loadings: list[np.ndarray]) -> np.ndarray:
    """s_k = sum_v alpha_v ||H_v[k, :]||^2 for each component k."""
    return sum(b.weight * np.einsum("kj,kj->k", H, H) for b, H in zip(blocks, loadings))


def normalise(W: np.ndarray, loadings: list[np.ndarray], blocks: list[ViewBlock]) -> None:
    """Rescale in place so that s_k = 1 for every component, keeping every W H_v unchanged."""
    root = np.sqrt(loading_norms(blocks, loadings))
    root[root == 0] = 1.0
    for H in loadings:
        H /= root[:, None]
    W *= root


def data_times_loadings(blocks: list[ViewBlock], loadings: list[np.ndarray], W_shape) -> np.ndarray:
    """P = sum_v alpha_v (M_v o X_v) H_v^T on all patients: the one pass over X of the W step."""
    P = np.zeros(W_shape, dtype=loadings[0].dtype)
    for block, H in zip(blocks, loadings):
        block.scatter_add(P, block.weight * (block.data @ H.T))
    return P


def repeat_update(update, start: np.ndarray, n_updates: int, stop: float = INNER_STOP,
                  settle: float | None = None) -> np.ndarray:
    """Apply `update` up to `n_updates` times.

    Stops once a step is below `stop` x the first step (Gillis & Glineur's inner rule) or,
    when `settle` is given, once a step is below `settle` x the size of the factor.
    """
    current, first_step = start, None
    for _ in range(n_updates):
        new = update(current)
        step = float(np.linalg.norm(new - current))
        current = new
        if settle is not None:
            if step <= settle * float(np.linalg.norm(current)):
                break
        elif first_step is None:
            first_step = step
        elif step <= stop * first_step:
            break
    return current


def update_patient_factor(W, P, blocks, loadings, smoothness: GraphSmoothness | None,
                          n_updates: int, settle: float | None = None) -> np.ndarray:
    """Repeat W <- W o (P + graph part) / (sum_v alpha_v (M o W H_v) H_v^T + graph part)."""
    whole = [b.rows is None and b.entry_mask is None for b in blocks]
    shared_gram = sum(b.weight * (H @ H.T) for b, H, w in zip(blocks, loadings, whole) if w)
    partial = [(b, H, H @ H.T) for b, H, w in zip(blocks, loadings, whole) if not w]

    def step(W):
        denominator = W @ shared_gram if any(whole) else np.zeros_like(W)
        for block, H, HHt in partial:
            block.scatter_add(denominator, block.weight * block.right_model_term(block.restrict(W), H, HHt))
        if smoothness is None:
            return W * _safe_ratio(P, denominator)
        pull, push = smoothness.update_parts(W)
        return W * _safe_ratio(P + pull, denominator + push)

    return repeat_update(step, W, n_updates, settle=settle)


def update_loadings(H, block: ViewBlock, W_rows, WtX, WtW, ridge, n_updates: int,
                    settle: float | None = None) -> np.ndarray:
    """Repeat H <- H o W^T X / (W^T (M o W H) + lambda g o H), with g_k = w_k^T L w_k."""
    if block.entry_mask is None:
        system = WtW if ridge is None else WtW + np.diag(ridge)  # (W^T W + lambda diag(g)) H in one product

        def step(H):
            return H * _safe_ratio(WtX, system @ H)
    else:

        def step(H):
            denominator = block.left_model_term(W_rows, H, WtW)
            if ridge is not None:
                denominator = denominator + ridge[:, None] * H
            return H * _safe_ratio(WtX, denominator)

    return repeat_update(step, H, n_updates, settle=settle)


def _relative_decrease(previous: float, current: float) -> float:
    return (previous - current) / max(abs(previous), np.finfo(float).tiny)


def iterate(blocks, W, loadings, smoothness: GraphSmoothness | None, *, max_iter: int, tol: float,
            n_updates: int) -> FitResult:
    """Outer iterations from (W, loadings) until the objective settles or `max_iter`."""
    W, loadings = W.copy(), [H.copy() for H in loadings]
    masked = any(b.entry_mask is not None for b in blocks)
    with single_threaded_blas():
        normalise(W, loadings, blocks)
    objective, quiet, errors = [], 0, []
    for _ in range(max_iter):
        P = data_times_loadings(blocks, loadings, W.shape)
        with single_threaded_blas():
            W = update_patient_factor(W, P, blocks, loadings, smoothness, 1 if masked else n_updates)
        factor_times_data = [block.restrict(W).T @ block.data for block in blocks]
        with single_threaded_blas():
            ridge = smoothness.strength * smoothness.per_component(W) if smoothness is not None else None
            errors = []
            for v, (block, WtX) in enumerate(zip(blocks, factor_times_data)):
                W_rows = block.restrict(W)
                WtW = W_rows.T @ W_rows
                steps = 1 if block.entry_mask is not None else n_updates
                loadings[v] = update_loadings(loadings[v], block, W_rows, WtX, WtW, ridge, steps)
                errors.append(block.squared_error(W_rows, loadings[v], WtX, WtW))
            graph_term = float(ridge @ loading_norms(blocks, loadings)) if ridge is not None else 0.0
            objective.append(sum(b.weight * e for b, e in zip(blocks, errors)) + graph_term)
            normalise(W, loadings, blocks)
        if len(objective) > 1:
            quiet = quiet + 1 if _relative_decrease(objective[-2], objective[-1]) < tol else 0
            if quiet >= PATIENCE:
                return FitResult(W, loadings, objective, errors, True)
    return FitResult(W, loadings, objective, errors, False)
