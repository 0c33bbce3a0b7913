"""Survival, clinical association, markers, gene-set enrichment and partition agreement of ANY grouping.

Each estimator wraps one function of `strataweave.evaluate` (or `subtypes.compare_partitions`):
`fit(grouping, ...)` takes a pandas Series of labels indexed by patient ID and keeps
`tables_` (tidy DataFrames) and `summary_` (the plain dict results.json holds).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator

from strataweave.api.display import Shown, fitted, new_axes
from strataweave.data.cohort import Cohort
from strataweave.evaluate import associate_clinical, enrich_markers, evaluate_survival, markers_by_modality
from strataweave.evaluate.grouping import group_order
from strataweave.report.palette import SEQUENTIAL, subtype_colours
from strataweave.subtypes.compare import compare_partitions


class _Evaluator(Shown, BaseEstimator):
    """Shared by the evaluations: `fit` stores the Evaluation's tables and summary."""

    #: the table `summary` shows
    _summary_table = ""

    def _keep(self, evaluation) -> _Evaluator:
        self.tables_ = evaluation.tables
        self.summary_ = evaluation.summary
        return self

    @property
    def summary(self) -> pd.DataFrame:
        return fitted(self, "tables_")[self._summary_table]


class SurvivalComparison(_Evaluator):
    """Kaplan-Meier, log-rank (asymptotic and permutation), pairwise, Cox and RMST across groups."""

    _summary_table = "medians"

    def __init__(self, time_column: str = "time", event_column: str = "event", *, covariates=(), strata=None,
                 rmst_horizon: float | None = None, n_permutations: int = 10_000, min_group_size: int = 5,
                 min_events: int = 10, events_per_term: int = 10, alpha: float = 0.05, random_state=None):
        self.time_column = time_column
        self.event_column = event_column
        self.covariates = covariates
        self.strata = strata
        self.rmst_horizon = rmst_horizon
        self.n_permutations = n_permutations
        self.min_group_size = min_group_size
        self.min_events = min_events
        self.events_per_term = events_per_term
        self.alpha = alpha
        self.random_state = random_state

    def fit(self, grouping: pd.Series, clinical: pd.DataFrame) -> SurvivalComparison:
        return self._keep(evaluate_survival(grouping, clinical, **self.get_params()))

    @property
    def p_value_(self) -> float | None:
        """The log-rank test's permutation p-value (asymptotic without permutations)."""
        logrank = fitted(self, "summary_")["logrank"]
        permuted = logrank["p_value_permutation"]
        return logrank["p_value"] if permuted is None else permuted

    def plot_curves(self, ax=None):
        """Kaplan-Meier curves with their confidence bands, one colour per group."""
        curves = fitted(self, "tables_")["km"]
        groups = list(pd.unique(curves["group"]))
        ax = new_axes(ax)
        for colour, group in zip(subtype_colours(len(groups)), groups):
            part = curves[curves["group"] == group]
            ax.step(part["time"], part["survival"], where="post", color=colour, label=str(group))
            ax.fill_between(part["time"], part["lower"], part["upper"], step="post", color=colour, alpha=0.15)
        ax.set(xlabel=self.time_column, ylabel="survival", ylim=(0, 1.02))
        ax.legend(frameon=False)
        return ax


class ClinicalAssociation(_Evaluator):
    """One association test per clinical variable (categorical or continuous) across the groups."""

    _summary_table = "association"

    def __init__(self, clinical_columns=None, *, categorical_columns=(), n_monte_carlo: int = 10_000,
                 random_state=None):
        self.clinical_columns = clinical_columns
        self.categorical_columns = categorical_columns
        self.n_monte_carlo = n_monte_carlo
        self.random_state = random_state

    def fit(self, grouping: pd.Series, clinical: pd.DataFrame) -> ClinicalAssociation:
        return self._keep(associate_clinical(grouping, clinical, **self.get_params()))

    def plot_p_values(self, ax=None):
        """-log10 of each variable's adjusted p-value."""
        table = self.summary
        column = "p_adjusted" if "p_adjusted" in table else "p_value"
        ax = new_axes(ax)
        ax.barh(table["variable"].astype(str), -np.log10(table[column].astype(float)), color=subtype_colours(1)[0])
        ax.set(xlabel=f"-log10 {column}")
        return ax


class MarkerSearch(_Evaluator):
    """Features that mark each group against the rest, per modality (normalised scale)."""

    def __init__(self, marker_test: str = "mann_whitney", markers_per_subtype: int = 20, marker_fdr: float = 0.05):
        self.marker_test = marker_test
        self.markers_per_subtype = markers_per_subtype
        self.marker_fdr = marker_fdr

    def fit(self, grouping: pd.Series, views: Cohort | dict) -> MarkerSearch:
        """`views`: a Cohort (its normalised views) or a dict of patients x features tables."""
        views = views.normalised_views() if isinstance(views, Cohort) else views
        return self._keep(markers_by_modality(grouping, views, **self.get_params()))

    @property
    def summary(self) -> pd.DataFrame:
        """The top markers of each group in every modality (markers_per_subtype per group, adjusted p
        below marker_fdr)."""
        rows = [pd.DataFrame(part["rows"]).assign(modality=name) for name, part in fitted(self, "summary_").items()]
        return pd.concat(rows, ignore_index=True) if rows else pd.DataFrame()

    def plot_markers(self, modality: str, ax=None):
        """Effect (difference in the group against the rest) of each group's top markers in `modality`."""
        table = self.summary
        table = table[table["modality"] == modality]
        groups = group_order(table["subtype"])
        ax = new_axes(ax)
        for colour, group in zip(subtype_colours(len(groups)), groups):
            part = table[table["subtype"] == group]
            ax.barh(part["feature"].astype(str) + f" ({group})", part["effect"], color=colour)
        ax.set(xlabel="difference, group minus rest", title=f"markers: {modality}")
        return ax


class GeneSetEnrichment(_Evaluator):
    """Over-representation (and a rank test) of each group's markers in gene sets."""

    _summary_table = "over_representation"

    def __init__(self, marker_fdr: float = 0.05, min_set_size: int = 5, max_set_size: int = 500,
                 sets_per_subtype: int = 10):
        self.marker_fdr = marker_fdr
        self.min_set_size = min_set_size
        self.max_set_size = max_set_size
        self.sets_per_subtype = sets_per_subtype

    def fit(self, markers: MarkerSearch | pd.DataFrame, gene_sets: dict, modality: str | None = None) -> GeneSetEnrichment:
        """`markers`: a fitted MarkerSearch (its `modality`, default the first) or its long table."""
        if isinstance(markers, MarkerSearch):
            tables = fitted(markers, "tables_")
            markers = tables[modality or next(iter(tables))]
        return self._keep(enrich_markers(markers, gene_sets, **self.get_params()))


class PartitionAgreement(Shown):
    """Agreement of two groupings of the same patients: ARI, NMI and their contingency table."""

    def __init__(self, a: pd.Series, b: pd.Series) -> None:
        self.comparison_ = compare_partitions(a, b)
        self.ari_, self.nmi_ = self.comparison_.ari, self.comparison_.nmi

    @property
    def summary(self) -> pd.DataFrame:
        return pd.DataFrame([{"ari": self.ari_, "nmi": self.nmi_, "patients": self.comparison_.n_patients}])

    def plot_contingency(self, ax=None):
        """Patients counted by (label in a, label in b)."""
        table = self.comparison_.contingency
        ax = new_axes(ax)
        ax.imshow(table.to_numpy(), cmap=SEQUENTIAL)
        for (i, j), count in np.ndenumerate(table.to_numpy()):
            ax.text(j, i, str(count), ha="center", va="center")
        ax.set(xticks=range(table.shape[1]), xticklabels=[str(c) for c in table.columns],
               yticks=range(table.shape[0]), yticklabels=[str(r) for r in table.index], xlabel="b", ylabel="a")
        return ax

