"""Results objects: a summary table, plot_* methods returning axes, an HTML view with the caution,
and evaluations of any grouping (here the planted subtypes of an invented cohort)."""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from matplotlib.axes import Axes  # noqa: E402

import strataweave as sw  # noqa: E402
from strataweave.data.synthetic import make_synthetic_cohort  # noqa: E402


@pytest.fixture(scope="module")
def analysis():
    made = make_synthetic_cohort(n_patients=90, n_subtypes=3, seed=8)
    table = made.tables["protein"]
    raw = table.T if made.orientations["protein"] == "features_in_rows" else table
    cohort = sw.cohort_from_tables(made.clinical, {"protein": (raw, "abundance")}, impute="median")
    graph = sw.GraphFusion(n_neighbours=10).fit(cohort)
    sweep = sw.SubtypeSweep(counts=[2, 3], n_resamples=2, random_state=1).fit(cohort, graph)
    return made, cohort, graph, sweep


def test_every_result_has_a_summary_plots_and_an_html_view(analysis):
    made, cohort, graph, sweep = analysis
    planted = made.planted.rename("planted")
    survival = sw.SurvivalComparison("os_months", "os_event", n_permutations=50, random_state=0).fit(planted, made.clinical)
    clinical = sw.ClinicalAssociation(["age_years"], n_monte_carlo=100, random_state=0).fit(planted, made.clinical)
    markers = sw.MarkerSearch(markers_per_subtype=5).fit(planted, cohort)
    agreement = sw.PartitionAgreement(sweep.model(3).labels_, planted)
    shown = {graph: graph.plot_embedding(planted), sweep: sweep.plot_criteria(), survival: survival.plot_curves(),
             clinical: clinical.plot_p_values(), markers: markers.plot_markers("protein"),
             agreement: agreement.plot_contingency()}
    for result, ax in shown.items():
        assert isinstance(result.summary, pd.DataFrame) and not result.summary.empty
        assert isinstance(ax, Axes)
        assert sw.CAUTION in result._repr_html_()
    assert isinstance(sweep.plot_consensus(), Axes)
    assert sweep.summary["recommended"].sum() == 1
    assert set(survival.summary["group"]) == set(planted)
    assert 0.0 <= survival.p_value_ <= 1.0
    assert agreement.summary.loc[0, "patients"] == len(cohort.patients)


def test_a_modality_given_without_its_kind_is_bad_input_naming_it():
    with pytest.raises(sw.InputError, match="modality 'rna'.*expected \\(table or path, kind\\)"):
        sw.cohort_from_tables(pd.DataFrame(index=["a"]), {"rna": pd.DataFrame()})


def test_an_unfitted_result_says_to_fit_first():
    with pytest.raises(sw.InputError, match="not fitted"):
        sw.SubtypeSweep().summary
    assert "not fitted" in sw.SubtypeSweep()._repr_html_()
