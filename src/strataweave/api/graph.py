"""GraphFusion: the fused patient-similarity graph of a cohort, as an estimator."""

from __future__ import annotations

from sklearn.base import BaseEstimator

from strataweave.api.display import Shown, fitted, new_axes
from strataweave.data.cohort import Cohort
from strataweave.evaluate.grouping import group_order
from strataweave.graph import PatientGraph, fuse_modalities, graph_diagnostics, spectral_embedding
from strataweave.report.palette import NEUTRAL, subtype_colours


class GraphFusion(Shown, BaseEstimator):
    """One k-nearest-neighbour graph per modality, fused by `rule` (see `graph.fuse_modalities`).

    `neighbour_search` is `auto`, `exact` or `approximate` (see `graph.neighbours`); the
    approximate search is seeded from `random_state`, so the same seed gives the same graph.
    Learned: `graph_` (PatientGraph on the cohort's patients, in their order), `affinity_`,
    `rule_` (the rule used: `auto` picks one), `rule_evidence_` and `neighbour_search_`
    (the search each modality got).
    """

    def __init__(self, rule: str = "auto", quorum: int | None = None, n_neighbours: int = 20,
                 metric: str = "euclidean", kernel: str = "scaled_exponential", kernel_spread: float = 0.5,
                 bandwidth: float | None = None, diffusion_neighbours: int | None = None,
                 diffusion_iterations: int = 20, neighbour_search: str = "auto", random_state: int | None = None):
        self.rule = rule
        self.quorum = quorum
        self.n_neighbours = n_neighbours
        self.metric = metric
        self.kernel = kernel
        self.kernel_spread = kernel_spread
        self.bandwidth = bandwidth
        self.diffusion_neighbours = diffusion_neighbours
        self.diffusion_iterations = diffusion_iterations
        self.neighbour_search = neighbour_search
        self.random_state = random_state

    def fit(self, cohort: Cohort | dict, y=None) -> GraphFusion:
        """Fuse a Cohort's normalised views (or a dict of patients x features tables)."""
        views = cohort.normalised_views() if isinstance(cohort, Cohort) else cohort
        graph = fuse_modalities(views, **self.get_params())
        self.graph_: PatientGraph = graph.restrict(cohort.patients) if isinstance(cohort, Cohort) else graph
        self.affinity_ = self.graph_.affinity
        self.rule_ = self.graph_.rule
        self.rule_evidence_ = self.graph_.rule_evidence
        self.neighbour_search_ = self.graph_.parameters["neighbour_search"]
        return self

    @property
    def summary(self):
        """One row for the fused graph and one per modality: edges, degree, components."""
        return graph_diagnostics(fitted(self, "graph_"))

    def plot_embedding(self, labels=None, ax=None):
        """Patients on the graph's first two spectral coordinates, coloured by `labels` if given."""
        graph = fitted(self, "graph_")
        xy = spectral_embedding(graph.affinity, n_dims=2)
        ax = new_axes(ax)
        if labels is None:
            ax.scatter(xy[:, 0], xy[:, 1], s=8, color=NEUTRAL)
        else:
            labels = labels.reindex(graph.patients)
            groups = group_order(labels.dropna())
            for colour, group in zip(subtype_colours(len(groups)), groups):
                chosen = (labels == group).to_numpy()
                ax.scatter(xy[chosen, 0], xy[chosen, 1], s=8, color=colour, label=str(group))
            ax.legend(frameon=False)
        ax.set(xlabel="spectral coordinate 1", ylabel="spectral coordinate 2", title=f"patient graph ({graph.rule})")
        return ax
