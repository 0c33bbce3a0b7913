"""JointNMF: one patient factor W shared by all modalities, one loading matrix H_v per
modality, W kept smooth on a patient graph (see `updates` for the objective and scaling)."""

from __future__ import annotations

import warnings

import numpy as np
from sklearn.base import BaseEstimator
from sklearn.exceptions import ConvergenceWarning

from strataweave.errors import InputError
from strataweave.factorize.init import initial_factors
from strataweave.factorize.smoothness import GraphSmoothness, graph_affinity
from strataweave.factorize.updates import (
    data_times_loadings,
    iterate,
    projection_rule,
    single_threaded_blas,
    update_loadings,
    update_patient_factor,
)
from strataweave.factorize.views import prepare_views
from strataweave.parameters import Parameter, check_parameters, choice, integer, number
from strataweave.seeding import child_seeds

INIT_METHODS = ("nndsvda", "nndsvd", "random")
DTYPES = {"float64": np.float64, "float32": np.float32}
SETTLED = 1e-9  # projections stop once a step moves the factor by less than this share of its size


#: JointNMF's parameters: rule, default (the same as __init__'s, tested) and help; the estimator
#: checks them once per fit, the workflow's [factorization] keys and their reference read them.
PARAMETERS = {
    "n_components": Parameter(integer(1), 4, "components of the patient factor (the model's rank)"),
    "graph_weight": Parameter(number(minimum=0), 1.0, "weight of the graph smoothness, free of cohort size"),
    "max_iter": Parameter(integer(1), 300, "most iterations of one fit"),
    "tol": Parameter(
        number(minimum=0), 1e-5,
        "settled when the objective falls by less than this share of the zero model's, three iterations in a row",
    ),
    "init": Parameter(choice(*INIT_METHODS), "nndsvda",
                      "the first fit's starting factors; restarts after it are random"),
    "n_restarts": Parameter(integer(1), 1, "fits from different starts; the lowest objective wins"),
    "dtype": Parameter(choice(*DTYPES), "float32", "precision of the factors and products"),
    "inner_updates": Parameter(integer(1), 10, "most cheap inner updates per outer iteration"),
    "transform_max_iter": Parameter(integer(1), 2000, "most updates when projecting new patients"),
}


# Own code: no library NMF masks missing patients or adds a graph (on one full view: 2-5x faster than scikit-learn's mu, slower than cd).
class JointNMF(BaseEstimator):
    """Graph-regularised joint NMF of several modalities that share patients.

    Minimises sum_v alpha_v ||M_v o (X_v - W H_v)||_F^2 + lambda tr(W^T L W) with L the
    Laplacian of `graph`, loadings normalised to sum_v alpha_v ||H_v[k]||^2 = 1 and
    lambda = graph_weight * n_patients / sum(graph) (so graph_weight is free of cohort size).

    Parameters: `n_components` (rank); `graph_weight`; `max_iter`; `tol` (decrease of the
    objective in one iteration as a share of its scale sum_v alpha_v ||X_v||^2, the objective
    of the zero model: converged when it is below tol for 3 iterations in a row, or below
    10 x tol for 5 iterations in a row in which the argmax labels of W, every component in
    use, did not change; the same rule with or without the graph and at every cohort size,
    see `updates.iterate`); `init` ("nndsvda",
    "nndsvd" or "random"; restarts after the first are random); `n_restarts` (the lowest
    objective wins); `random_state`; `dtype` of the factors and the products ("float32" or
    "float64"; the objective is summed in float64 either way): float32 halves the time of an
    iteration, and on the validity panel (16 cohorts, one run) it left every chosen count and
    every full-data label at every count unchanged but at one count of one cohort (a near tie
    at 3 of 10 classes), PAC within 0.003; `modality_weights`
    (alpha_v, default 1 / ||X_v||_F^2); `inner_updates` (most cheap inner updates per outer
    iteration); `transform_max_iter` (updates when projecting new patients).

    Warm start: `fit(..., W_init=, H_init=)` starts from given factors (one of them is
    enough, the other is projected); it replaces `init` for the first restart.
    """

    def __init__(self, n_components: int = 4, *, graph_weight: float = 1.0, max_iter: int = 300,
                 tol: float = 1e-5, init: str = "nndsvda", n_restarts: int = 1, random_state=None,
                 dtype: str = "float32", modality_weights=None, inner_updates: int = 10,
                 transform_max_iter: int = 2000):
        self.n_components = n_components
        self.graph_weight = graph_weight
        self.max_iter = max_iter
        self.tol = tol
        self.init = init
        self.n_restarts = n_restarts
        self.random_state = random_state
        self.dtype = dtype
        self.modality_weights = modality_weights
        self.inner_updates = inner_updates
        self.transform_max_iter = transform_max_iter

    def _start(self, prepared, smoothness, rng, W_init, H_init, method):
        blocks, n, k = prepared.blocks, prepared.n_patients, self.n_components
        if W_init is None and H_init is None:
            return initial_factors(blocks, n, k, method, rng)
        dtype = blocks[0].data.dtype
        if H_init is not None:
            loadings = [np.array(H, dtype=dtype) for H in H_init]
            expected = [(k, b.data.shape[1]) for b in blocks]
            if [H.shape for H in loadings] != expected:
                raise InputError(f"H_init: found shapes {[H.shape for H in loadings]}; expected {expected}")
        if W_init is not None:
            W = np.array(W_init, dtype=dtype)
            if W.shape != (n, k) or np.any(W < 0):
                raise InputError(f"W_init: found shape {W.shape} or negative entries; expected ({n}, {k}), non-negative")
        # A start is projected only as far as the fit's own tol, since the iterations refine it
        # anyway: projecting to SETTLED took 29 of the 40 s the demo's sweep spent in fits.
        settle = max(float(self.tol), SETTLED)
        if W_init is None:
            W = self._project_patients(blocks, loadings, n, smoothness, settle)
        if H_init is None:
            loadings = [self._project_loadings(b, W, settle) for b in blocks]
        return W, loadings

    def _project_patients(self, blocks, loadings, n, smoothness=None, settle=SETTLED):
        """W minimising the objective with every H_v fixed (multiplicative NNLS), until an
        update moves it by less than `settle` of its size."""
        P = data_times_loadings(blocks, loadings, (n, self.n_components))
        start = np.ones_like(P)
        return update_patient_factor(start, P, blocks, loadings, smoothness, int(self.transform_max_iter),
                                     projection_rule(settle))

    def _project_loadings(self, block, W, settle):
        """H_v minimising the data term of one modality with W fixed, until an update moves it
        by less than `settle` of its size."""
        W_rows = block.restrict(W)
        start = np.ones((self.n_components, block.data.shape[1]), dtype=W.dtype)
        WtX, WtW = W_rows.T @ block.data, W_rows.T @ W_rows
        return update_loadings(start, block, W_rows, WtX, WtW, None, int(self.transform_max_iter), projection_rule(settle))

    def fit(self, views, graph=None, mask=None, *, W_init=None, H_init=None):
        """Fit to `views` (list or dict of patients x features; all-NaN rows = missing modality).

        `mask`: optional list, one per view, of None, a bool vector (patient has the view) or
        a bool matrix (entry observed). `graph`: sparse affinity aligned with the view rows,
        or a PatientGraph (its patients must match the views' index).
        """
        check_parameters(PARAMETERS, self.get_params())
        prepared = prepare_views(views, mask=mask, weights=self.modality_weights,
                                 n_components=self.n_components, dtype=DTYPES[self.dtype])
        blocks, n = prepared.blocks, prepared.n_patients
        smoothness = None
        if graph is not None and self.graph_weight != 0:
            affinity = graph_affinity(graph, prepared.patients)
            smoothness = GraphSmoothness(affinity, self.graph_weight, n, DTYPES[self.dtype])
        best = None
        for restart, seed in enumerate(child_seeds(self.random_state, int(self.n_restarts))):
            rng = np.random.default_rng(seed)
            warm = (W_init, H_init) if restart == 0 else (None, None)
            with single_threaded_blas():
                W, loadings = self._start(prepared, smoothness, rng, *warm, self.init if restart == 0 else "random")
            result = iterate(blocks, W, loadings, smoothness, max_iter=int(self.max_iter), tol=self.tol,
                             n_updates=int(self.inner_updates))
            if best is None or result.objective[-1] < best.objective[-1]:
                best = result
        if not best.converged:
            warnings.warn(
                f"JointNMF stopped at max_iter={self.max_iter} before the objective or the labels settled (tol={self.tol}); "
                "raise max_iter or tol",
                ConvergenceWarning,
                stacklevel=2,
            )
        self.patient_factor_ = best.W
        self.components_ = best.loadings
        self.objective_ = np.asarray(best.objective)
        self.n_iter_ = len(best.objective)
        self.modality_weights_ = np.array([b.weight for b in blocks])
        self.view_names_ = [b.name for b in blocks]
        self.feature_names_ = prepared.feature_names
        self.effective_graph_weight_ = smoothness.strength if smoothness is not None else 0.0
        self.reconstruction_error_ = np.sqrt([e / b.squared_norm for b, e in zip(blocks, best.squared_errors)])
        return self

    def fit_transform(self, views, graph=None, mask=None, *, W_init=None, H_init=None) -> np.ndarray:
        """Fit and return the patient factor W (patients x n_components)."""
        return self.fit(views, graph, mask, W_init=W_init, H_init=H_init).patient_factor_

    def transform(self, new_views, mask=None) -> np.ndarray:
        """W rows for new patients with every H_v fixed, from whichever modalities each has."""
        if not hasattr(self, "components_"):
            raise InputError("JointNMF: not fitted; expected fit() or from_state() before transform()")
        prepared = prepare_views(
            new_views, mask=mask, weights=self.modality_weights_, dtype=DTYPES[self.dtype],
            expected_features=[H.shape[1] for H in self.components_], feature_names=self.feature_names_,
        )
        if len(prepared.blocks) != len(self.components_):
            raise InputError(f"views: found {len(prepared.blocks)}; expected {len(self.components_)} like the training data")
        with single_threaded_blas():
            return self._project_patients(prepared.blocks, self.components_, prepared.n_patients)

    def to_state(self) -> tuple[dict, dict[str, np.ndarray]]:
        """(JSON-safe dict, arrays for .npz) from which `from_state` rebuilds the fitted model."""
        params = self.get_params()
        if params["modality_weights"] is not None:
            params["modality_weights"] = [float(w) for w in params["modality_weights"]]
        if not isinstance(params["random_state"], (int, type(None))):
            params["random_state"] = None
        state = {
            "params": params,
            "view_names": self.view_names_,
            "feature_names": self.feature_names_,
            "n_iter": self.n_iter_,
            "effective_graph_weight": float(self.effective_graph_weight_),
            "reconstruction_error": self.reconstruction_error_.tolist(),
        }
        arrays = {f"loadings_{v}": H for v, H in enumerate(self.components_)}
        arrays.update(objective=self.objective_, modality_weights=self.modality_weights_)
        return state, arrays

    @classmethod
    def from_state(cls, state: dict, arrays) -> "JointNMF":
        """The fitted model saved by `to_state` (arrays as loaded with allow_pickle=False)."""
        model = cls(**state["params"])
        n_views = len(state["view_names"])
        missing = [key for key in [f"loadings_{v}" for v in range(n_views)] + ["objective", "modality_weights"]
                   if key not in arrays]
        if missing:
            raise InputError(f"saved model: array {missing[0]!r} is missing; expected loadings for {n_views} views")
        model.components_ = [np.asarray(arrays[f"loadings_{v}"], dtype=DTYPES[model.dtype]) for v in range(n_views)]
        model.objective_ = np.asarray(arrays["objective"])
        model.modality_weights_ = np.asarray(arrays["modality_weights"])
        model.view_names_ = list(state["view_names"])
        model.feature_names_ = state["feature_names"]
        model.n_iter_ = int(state["n_iter"])
        model.effective_graph_weight_ = float(state["effective_graph_weight"])
        model.reconstruction_error_ = np.asarray(state["reconstruction_error"])
        return model
