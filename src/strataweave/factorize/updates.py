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
they stop moving (`InnerRule`) or `n_updates` times. What an inner update needs that stays
fixed while the other factor does is built once per outer iteration, so an inner update is
a few in-place operations on preallocated buffers: for W, one product with the Gram matrix
of the loadings (each patient's own, with the graph's diagonal, when some patients miss a
modality) and one sparse graph product; for H, one small product per modality and one set
of element-wise operations for all modalities together.
"""

from __future__ import annotations

from contextlib import nullcontext
from dataclasses import dataclass
from functools import cache

import numpy as np
from threadpoolctl import ThreadpoolController

from strataweave.factorize.smoothness import GraphSmoothness
from strataweave.factorize.views import ViewBlock

INNER_STOP = 0.1  # inner updates stop once a step moves less than this share of the first step
PATIENCE = 3  # converged after this many consecutive iterations with a decrease below tol x scale
LABEL_PATIENCE = 5  # or after this many consecutive iterations with settled labels ...
LABEL_SLACK = 10.0  # ... and a decrease below LABEL_SLACK x tol x scale in each


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


def _blas_switch():
    """`single_threaded_blas`, or a no-op when BLAS already runs on one thread (as in the
    sweep's workers): each switch costs about 45 us, 2 per outer iteration."""
    pools = _blas_controller().select(user_api="blas").lib_controllers
    return nullcontext if all(pool.num_threads == 1 for pool in pools) else single_threaded_blas


def objective_scale(blocks: list[ViewBlock]) -> float:
    """sum_v alpha_v ||M_v o X_v||_F^2: the objective of the zero model (W = 0), an upper
    bound of the best objective whatever the graph, against which decreases are measured."""
    return float(sum(b.weight * b.squared_norm for b in blocks))


def loading_norms(blocks: list[ViewBlock], loadings: list[np.ndarray]) -> np.ndarray:
    """s_k = sum_v alpha_v ||H_v[k, :]||^2 for each component k."""
    return sum(b.weight * np.einsum("kj,kj->k", H, H) for b, H in zip(blocks, loadings))


def normalise(W: np.ndarray, loadings: list[np.ndarray], blocks: list[ViewBlock]) -> np.ndarray:
    """Rescale in place so that s_k = 1 for every component, keeping every W H_v unchanged;
    returns the factors by which the columns of W were multiplied."""
    root = np.sqrt(loading_norms(blocks, loadings))
    root[root == 0] = 1.0
    for H in loadings:
        H /= root[:, None]
    W *= root
    return root


def _transpose_is_faster(dtype) -> bool:
    """Whether X H^T is faster taken as (H X^T)^T. Measured with OpenBLAS 0.3.31 on one
    thread (rank 4-6): in float64 1.2-1.4x faster at 1,700-8,000 patients (0.9x at 400);
    in float32 the plain order is 1.4-1.8x faster."""
    return np.dtype(dtype) == np.float64


def data_times_loadings(blocks: list[ViewBlock], loadings: list[np.ndarray], W_shape) -> np.ndarray:
    """P = sum_v alpha_v (M_v o X_v) H_v^T on all patients: the one pass over X of the W step."""
    P = np.zeros(W_shape, dtype=loadings[0].dtype)
    transposed = _transpose_is_faster(P.dtype)
    for block, H in zip(blocks, loadings):
        product = (H @ block.data.T).T if transposed else block.data @ H.T
        product *= block.weight
        block.scatter_add(P, product)
    return P


@dataclass(frozen=True)
class InnerRule:
    """When repeated inner updates stop: after a step shorter than `ratio` x the first step
    (Gillis & Glineur's rule; 0 = off) or shorter than `still` x the size of the updated
    factor (it no longer moves; 0 = off)."""

    ratio: float = INNER_STOP
    still: float = 0.0

    def settled(self, step: float, first: float | None, factor: np.ndarray) -> bool:
        if first is not None and step <= self.ratio * first:
            return True
        return self.still > 0 and step <= self.still * float(np.sqrt(np.vdot(factor, factor)))


def projection_rule(settle: float) -> InnerRule:
    """Inner updates run to a projection: only the factor's own settling stops them."""
    return InnerRule(ratio=0.0, still=settle)


def floored(denominator: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """The denominator of a multiplicative update, no entry below eps^2 times its largest (eps: machine epsilon).

    A component whose factor has shrunk towards zero has denominators that underflow while its
    numerators do not; in float32 their ratio then overflows and the factors turn to NaN (seen
    at 12 components of a 1,797-patient resample). The relative floor lets such a component
    die out instead. At eps^2 (1.4e-14 relative in float32) the floor stays below the
    denominators of a healthy fit: the bundled demo's subtypes and criteria were unchanged.
    """
    eps = np.finfo(denominator.dtype).eps
    floor = max(float(eps * eps * denominator.max(initial=0.0)), np.finfo(denominator.dtype).tiny)
    return np.maximum(denominator, floor, out=out)


class PatientStep:
    """The W update W <- W o (P + lambda (D + A) W) / (sum_v alpha_v (M_v o W H_v) H_v^T + 2 lambda D W).

    For modalities without an entry mask the denominator is W_i G_i row by row, with G_i =
    sum_v alpha_v [patient i has v] H_v H_v^T + 2 lambda d_i I built once per set of loadings
    (`set_loadings`): no gather or scatter of rows per modality in the inner updates. A
    modality with scattered missing entries adds its masked product on top.
    """

    def __init__(self, blocks: list[ViewBlock], n_patients: int, n_components: int,
                 smoothness: GraphSmoothness | None):
        dtype = blocks[0].data.dtype
        self.blocks = blocks
        self.smoothness = smoothness
        self.full = [v for v, b in enumerate(blocks) if b.entry_mask is None]
        self.masked = [v for v, b in enumerate(blocks) if b.entry_mask is not None]
        self.weights = np.array([blocks[v].weight for v in self.full], dtype=dtype)
        # one Gram matrix for all patients when every modality without an entry mask has them
        # all: W G (+ 2 lambda D W) is then 2-3x faster than the row-by-row product (24 vs 64 us
        # at 2,000 patients, rank 6)
        self.per_patient = any(blocks[v].rows is not None for v in self.full)
        if self.per_patient:
            self.presence = np.zeros((n_patients, len(self.full)), dtype=dtype)
            for column, v in enumerate(self.full):
                rows = blocks[v].rows
                self.presence[slice(None) if rows is None else rows, column] = blocks[v].weight
        shape = (n_patients, n_components)
        self.numerator, self.denominator, self.spare = (np.empty(shape, dtype=dtype) for _ in range(3))
        self.gram = None
        self.loadings = None

    def set_loadings(self, loadings: list[np.ndarray]) -> None:
        """Build the Gram matrices of the current loadings (once per outer iteration); the
        graph's diagonal 2 lambda D joins each patient's own matrix when there is one."""
        k, dtype = loadings[0].shape[0], loadings[0].dtype
        grams = np.stack([loadings[v] @ loadings[v].T for v in self.full]) if self.full else np.zeros((0, k, k), dtype)
        if self.per_patient:
            self.gram = (self.presence @ grams.reshape(len(self.full), k * k)).reshape(-1, k, k)
            if self.smoothness is not None:
                self.gram.reshape(-1, k * k)[:, :: k + 1] += self.smoothness.push_diagonal
        else:
            self.gram = np.einsum("v,vkl->kl", self.weights, grams)
        self.loadings = loadings

    def _denominator(self, W: np.ndarray) -> np.ndarray:
        out = self.denominator
        if self.per_patient:
            np.einsum("ik,ikl->il", W, self.gram, out=out)
        else:
            np.matmul(W, self.gram, out=out)
        if self.smoothness is not None and not self.per_patient:
            out += np.multiply(self.smoothness.push_diagonal, W, out=self.spare)
        for v in self.masked:
            block, H = self.blocks[v], self.loadings[v]
            block.scatter_add(out, block.weight * block.right_model_term(block.restrict(W), H, None))
        return out

    def run(self, W: np.ndarray, P: np.ndarray, n_updates: int, rule: InnerRule,
            graph_product: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray | None]:
        """Up to `n_updates` W updates from W (overwritten); returns (new W, lambda (D + A) W of it).

        `graph_product`: lambda (D + A) W for the given W when the caller has it."""
        graph = self.smoothness
        if graph is not None and graph_product is None:
            graph_product = graph.symmetric_product(W)
        first = None
        for _ in range(n_updates):
            numerator = P if graph is None else np.add(P, graph_product, out=self.numerator)
            denominator = floored(self._denominator(W), out=self.denominator)
            new = np.multiply(W, np.divide(numerator, denominator, out=denominator), out=self.spare)
            difference = np.subtract(new, W, out=self.denominator)
            step = float(np.sqrt(np.vdot(difference, difference)))
            self.spare, W = W, new
            if graph is not None:
                graph_product = graph.symmetric_product(W)
            if rule.settled(step, first, W):
                break
            first = step if first is None else first
        return W, graph_product


def update_patient_factor(W, P, blocks, loadings, smoothness: GraphSmoothness | None,
                          n_updates: int, rule: InnerRule) -> np.ndarray:
    """Repeat W <- W o (P + graph part) / (sum_v alpha_v (M o W H_v) H_v^T + graph part)."""
    step = PatientStep(blocks, W.shape[0], W.shape[1], smoothness)
    step.set_loadings(loadings)
    return step.run(np.array(W, order="C"), P, n_updates, rule)[0]


def _masked_loadings(H, block: ViewBlock, W_rows, WtX, WtW, ridge, n_updates: int, rule: InnerRule) -> np.ndarray:
    """H <- H o W^T X / (W^T (M o W H) + lambda g o H) for a modality with missing entries."""
    first = None
    for _ in range(n_updates):
        denominator = block.left_model_term(W_rows, H, WtW)
        if ridge is not None:
            denominator = denominator + ridge[:, None] * H
        new = H * (WtX / floored(denominator))
        step = float(np.linalg.norm(new - H))
        H = new
        if rule.settled(step, first, H):
            break
        first = step if first is None else first
    return H


class LoadingStep:
    """H_v <- H_v o W_v^T X_v / (W_v^T (M_v o W_v H_v) + lambda g o H_v), g_k = w_k^T L w_k.

    The loadings of all modalities without an entry mask live side by side in one k x
    sum(features) array, so the element-wise part of an inner update and its step length
    are one operation each for all of them; only the product with each modality's
    (W_v^T W_v + lambda diag(g)) is per modality. A masked modality is updated on its own.
    """

    def __init__(self, blocks: list[ViewBlock], n_components: int):
        dtype = blocks[0].data.dtype
        self.blocks = blocks
        self.joint = [v for v, b in enumerate(blocks) if b.entry_mask is None]
        edges = np.cumsum([0] + [blocks[v].data.shape[1] for v in self.joint])
        self.columns = {v: slice(int(a), int(b)) for v, a, b in zip(self.joint, edges[:-1], edges[1:])}
        self.shared_system = all(blocks[v].rows is None for v in self.joint)
        shape = (n_components, int(edges[-1]))
        self.current, self.spare, self.denominator, self.cross = (np.empty(shape, dtype=dtype) for _ in range(4))

    def _views(self, joint: np.ndarray, loadings: list[np.ndarray]) -> list[np.ndarray]:
        return [joint[:, self.columns[v]] if v in self.columns else H for v, H in enumerate(loadings)]

    def adopt(self, loadings: list[np.ndarray]) -> list[np.ndarray]:
        """Copy `loadings` in; returns them, the joint ones as column slices of the joint array."""
        for v in self.joint:
            self.current[:, self.columns[v]] = loadings[v]
        return self._views(self.current, [np.array(H, order="C") for H in loadings])

    def factor_times_data(self, factor_rows: list[np.ndarray]) -> list[np.ndarray]:
        """W_v^T X_v for every modality from its rows W_v of W (the one pass over X of the
        H step), the joint ones written side by side into one array."""
        out = []
        for v, (block, W_rows) in enumerate(zip(self.blocks, factor_rows)):
            if v in self.columns:
                out.append(np.matmul(W_rows.T, block.data, out=self.cross[:, self.columns[v]]))
            else:
                out.append(W_rows.T @ block.data)
        return out

    def run(self, loadings: list[np.ndarray], factor_rows: list[np.ndarray], grams: list[np.ndarray],
            cross: list[np.ndarray], ridge: np.ndarray | None, n_updates: int, rule: InnerRule) -> list[np.ndarray]:
        """Up to `n_updates` updates of every modality's loadings, from W_v (`factor_rows`),
        W_v^T W_v (`grams`) and W_v^T X_v (`cross`, from `factor_times_data`)."""
        systems = [grams[v] if ridge is None else grams[v] + np.diag(ridge) for v in self.joint]
        H, first = self.current, None
        for _ in range(n_updates if self.joint else 0):
            if self.shared_system:
                np.matmul(systems[0], H, out=self.denominator)  # (W^T W + lambda diag(g)) H in one product
            else:
                for v, system in zip(self.joint, systems):
                    np.matmul(system, H[:, self.columns[v]], out=self.denominator[:, self.columns[v]])
            denominator = floored(self.denominator, out=self.denominator)
            new = np.multiply(H, np.divide(self.cross, denominator, out=denominator), out=self.spare)
            difference = np.subtract(new, H, out=self.denominator)
            step = float(np.sqrt(np.vdot(difference, difference)))
            self.spare, H = H, new
            if rule.settled(step, first, H):
                break
            first = step if first is None else first
        self.current = H
        loadings = self._views(H, loadings)
        for v, block in enumerate(self.blocks):
            if v not in self.columns:
                loadings[v] = _masked_loadings(loadings[v], block, factor_rows[v], cross[v], grams[v], ridge, 1, rule)
        return loadings


def update_loadings(H, block: ViewBlock, W_rows, WtX, WtW, ridge, n_updates: int, rule: InnerRule) -> np.ndarray:
    """Repeat H <- H o W^T X / (W^T (M o W H) + lambda g o H), with g_k = w_k^T L w_k."""
    if block.entry_mask is not None:
        return _masked_loadings(H, block, W_rows, WtX, WtW, ridge, n_updates, rule)
    step = LoadingStep([block], H.shape[0])
    loadings = step.adopt([H])
    np.copyto(step.cross, WtX)
    return np.array(step.run(loadings, [W_rows], [WtW], [step.cross], ridge, n_updates, rule)[0])


def iterate(blocks, W, loadings, smoothness: GraphSmoothness | None, *, max_iter: int, tol: float,
            n_updates: int) -> FitResult:
    """Outer iterations from (W, loadings) until the objective or the labels settle, or `max_iter`.

    Converged, by whichever comes first (decreases are measured against the fixed data scale
    `objective_scale(blocks)`, so both rules mean the same with or without the graph term, for
    every cohort size and every restart):
      - the objective decreased by less than `tol` x scale in PATIENCE consecutive iterations;
      - the labels (argmax of each row of the normalised W) stayed the same, with every
        component labelling some patient, and the objective decreased by less than
        LABEL_SLACK x `tol` x scale, in LABEL_PATIENCE consecutive iterations. An empty
        component means one component carries the profile common to all patients (see
        `labels`), so those labels say nothing about the subtypes and do not count.
    Inner updates also stop once a step moves its factor by less than `tol` of its size.
    """
    n, k = W.shape
    threshold = tol * objective_scale(blocks)
    rule = InnerRule(INNER_STOP, tol)
    switch = _blas_switch()
    patient_step, loading_step = PatientStep(blocks, n, k, smoothness), LoadingStep(blocks, k)
    W, loadings = np.array(W, order="C"), loading_step.adopt(loadings)
    masked = any(b.entry_mask is not None for b in blocks)
    with switch():
        normalise(W, loadings, blocks)
    objective, quiet, steady, converged, errors, graph_product = [], 0, 0, False, [], None
    labels = W.argmax(axis=1)
    for _ in range(max_iter):
        P = data_times_loadings(blocks, loadings, W.shape)
        with switch():
            patient_step.set_loadings(loadings)
            W, graph_product = patient_step.run(W, P, 1 if masked else n_updates, rule, graph_product)
        rows = [block.restrict(W) for block in blocks]
        cross = loading_step.factor_times_data(rows)
        with switch():
            ridge = smoothness.ridge(W, graph_product) if smoothness is not None else None
            grams = [R.T @ R for R in rows]
            loadings = loading_step.run(loadings, rows, grams, cross, ridge, n_updates, rule)
            errors = [b.squared_error(R, H, WtX, WtW) for b, R, H, WtX, WtW in zip(blocks, rows, loadings, cross, grams)]
            graph_term = float(ridge @ loading_norms(blocks, loadings)) if ridge is not None else 0.0
            objective.append(sum(b.weight * e for b, e in zip(blocks, errors)) + graph_term)
            root = normalise(W, loadings, blocks)
            if graph_product is not None:
                graph_product *= root
        previous, labels = labels, W.argmax(axis=1)
        if len(objective) > 1:
            decrease = objective[-2] - objective[-1]
            quiet = quiet + 1 if decrease < threshold else 0
            settled = np.array_equal(labels, previous) and np.bincount(labels, minlength=k).all()
            steady = steady + 1 if decrease < LABEL_SLACK * threshold and settled else 0
            converged = quiet >= PATIENCE or steady >= LABEL_PATIENCE
            if converged:
                break
    return FitResult(W, [np.array(H) for H in loadings], objective, errors, converged)
