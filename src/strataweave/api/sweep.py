"""SubtypeSweep: how many subtypes a cohort supports, and the fitted subtypes at every count tried."""

from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator

from strataweave.api.display import Shown, fitted, new_axes
from strataweave.api.graph import GraphFusion
from strataweave.data.cohort import Cohort
from strataweave.errors import InputError
from strataweave.factorize.joint_nmf import PARAMETERS as NMF_PARAMETERS
from strataweave.factorize.views import relative_modality_weights
from strataweave.report.palette import NEUTRAL_SHADES, SEQUENTIAL
from strataweave.subtypes.model import ModelModality, SubtypeModel
from strataweave.subtypes.parallel import ParallelSettings
from strataweave.subtypes.result import HIGHER_IS_BETTER
from strataweave.subtypes.settings import PARAMETERS as SWEEP_PARAMETERS
from strataweave.subtypes.settings import SweepSettings
from strataweave.subtypes.sweep import sweep_subtype_counts


class SubtypeSweep(Shown, BaseEstimator):
    """Fits every count in `counts` on all patients and on `n_resamples` resamples, judges the
    counts by consensus criteria and recommends one (see `subtypes.sweep_subtype_counts`).

    `modality_weights` (one per modality, relative to the factorisation's own balance) and the
    JointNMF parameters shape every fit; `backend`/`n_jobs`/`scheduler` say where the resamples
    run (results are the same on each). Learned: `result_` (SweepResult), `criteria_`,
    `consensus_`, `recommended_count_`, `recommendation_`, `cohort_`; `model(count)` is the fitted
    SubtypeModel at any count swept.
    """

    def __init__(self, counts=(2, 3, 4, 5, 6, 7, 8), *, graph_weight: float = 1.0, max_iter: int = 300,
                 tol: float = 1e-5, init: str = "nndsvda", n_restarts: int = 1, modality_weights=None,
                 n_resamples: int = 50, fraction: float = 0.8, feature_fraction: float = 1.0,
                 pac_window=(0.1, 0.9), pac_tolerance: float = 0.01, min_size: int | None = None,
                 core_threshold: float = 0.8, resample_restarts: int = 1, warm_start: bool = False,
                 start_from: str = "graph", labels_from: str = "best_fit", backend: str = "serial",
                 n_jobs: int = 1, scheduler: str | None = None, random_state=None):
        self.counts = counts
        self.graph_weight = graph_weight
        self.max_iter = max_iter
        self.tol = tol
        self.init = init
        self.n_restarts = n_restarts
        self.modality_weights = modality_weights
        self.n_resamples = n_resamples
        self.fraction = fraction
        self.feature_fraction = feature_fraction
        self.pac_window = pac_window
        self.pac_tolerance = pac_tolerance
        self.min_size = min_size
        self.core_threshold = core_threshold
        self.resample_restarts = resample_restarts
        self.warm_start = warm_start
        self.start_from = start_from
        self.labels_from = labels_from
        self.backend = backend
        self.n_jobs = n_jobs
        self.scheduler = scheduler
        self.random_state = random_state

    def _weights(self, cohort: Cohort) -> list[float]:
        if self.modality_weights is None:
            return [1.0] * len(cohort.names)
        weights = [float(w) for w in self.modality_weights]
        if len(weights) != len(cohort.names):
            raise InputError(f"modality_weights: found {len(weights)}; expected {len(cohort.names)}, one per modality")
        return weights

    def fit(self, cohort: Cohort, graph) -> SubtypeSweep:
        """Sweep the counts on `cohort` with its fused patient graph (a fitted GraphFusion or PatientGraph)."""
        if not isinstance(cohort, Cohort):
            raise InputError(f"cohort: found {type(cohort).__name__}; expected a strataweave Cohort")
        graph = fitted(graph, "graph_") if isinstance(graph, GraphFusion) else graph
        views = dict(zip(cohort.names, cohort.aligned_views()))
        profiles = {name: frame.reindex(cohort.patients) for name, frame in cohort.normalised_views().items()}
        params = self.get_params(deep=False)  # each goes where its parameter table says
        options = {name: params[name] for name in NMF_PARAMETERS if name in params}
        self.weights_ = self._weights(cohort)
        scaled = relative_modality_weights(list(views.values()), self.weights_)
        if scaled is not None:
            options["modality_weights"] = scaled
        settings = SweepSettings(**{name: params[name] for name in SWEEP_PARAMETERS if name in params})
        parallel = ParallelSettings(backend=self.backend, n_jobs=self.n_jobs, scheduler=self.scheduler)
        self.result_ = sweep_subtype_counts(views, graph, list(self.counts), profiles=profiles, settings=settings,
                                            factorization=options, parallel=parallel, random_state=self.random_state)
        self.criteria_ = self.result_.criteria
        self.consensus_ = self.result_.consensus
        self.recommendation_ = self.result_.recommendation
        self.recommended_count_ = int(self.recommendation_.count)
        self.cohort_ = cohort
        return self

    def model(self, count: int | None = None) -> SubtypeModel:
        """The fitted subtypes at `count` (default: the recommended count), ready to place new patients."""
        result = fitted(self, "result_")
        count = self.recommended_count_ if count is None else count
        if count not in result.models:
            raise InputError(f"count: found {count!r}; expected one of the counts swept {result.counts}")
        cohort = self.cohort_
        modalities = [ModelModality(m.name, m.kind, w, None, m.preprocessor)
                      for m, w in zip(cohort.modalities, self.weights_)]
        return SubtypeModel.from_fit(result.models[count], cohort.aligned_views(), result.assignments[count], modalities)

    @property
    def summary(self) -> pd.DataFrame:
        """One row per count: every criterion, and whether it is the recommended count."""
        criteria = fitted(self, "criteria_")
        return criteria.assign(recommended=criteria.index == self.recommended_count_)

    def plot_criteria(self, ax=None):
        """Each criterion across the counts, scaled to its own range; the recommended count marked."""
        criteria = fitted(self, "criteria_")
        ax = new_axes(ax)
        for shade, name in zip(np.resize(NEUTRAL_SHADES, len(criteria.columns)), criteria.columns):
            values = criteria[name].astype(float)
            spread = values.max() - values.min()
            scaled = (values - values.min()) / spread if spread > 0 else values * 0.0
            direction = {True: "higher better", False: "lower better"}.get(HIGHER_IS_BETTER.get(name), "")
            ax.plot(criteria.index, scaled, marker="o", color=shade, label=f"{name} {direction}".strip())
        ax.axvline(self.recommended_count_, linestyle="--", color=NEUTRAL_SHADES[0])
        ax.set(xlabel="subtype count", ylabel="criterion (scaled to its range)", xticks=list(criteria.index))
        ax.legend(frameon=False, fontsize="small")
        return ax

    def plot_consensus(self, count: int | None = None, ax=None):
        """The consensus matrix at `count` (default: recommended), patients ordered by subtype
        (above `consensus.KEPT_SIDE` patients, the seeded sample the sweep kept)."""
        result = fitted(self, "result_")
        count = self.recommended_count_ if count is None else count
        codes = result.assignments[count]["subtype"].to_numpy()[result.consensus_patients]
        order = np.argsort(codes, kind="stable")
        ax = new_axes(ax)
        image = ax.imshow(result.consensus[count][np.ix_(order, order)], cmap=SEQUENTIAL, vmin=0, vmax=1)
        ax.figure.colorbar(image, ax=ax, label="consensus")
        ax.set(title=f"consensus at {count} subtypes", xticks=[], yticks=[])
        return ax
