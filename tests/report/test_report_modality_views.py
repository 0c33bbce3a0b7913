"""Per-modality views in the report: planned beside the right sections, no empty panel, a note for what is left out."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from report_fixture import make_results, write_run_folder

from strataweave.report.figure_catalogue import plan_figures
from strataweave.report.figure_style import new_figure, report_style
from strataweave.report.figures_modalities import factor_names
from strataweave.report.html_report import render_html
from strataweave.report.run_folder import load_run

NEW_ARRAYS = ("modality_", "factor_", "volcano_")


def _run(tmp_path: Path, edit=None):
    results, arrays = make_results()
    if edit is not None:
        edit(results, arrays)
    return load_run(write_run_folder(tmp_path / "run", results, arrays))


def _drawn(run, name: str):
    plan = next(p for p in plan_figures(run) if p.name == name)
    with report_style():
        fig = new_figure(plan.size)
        plan.draw(run, fig)
    return fig


def _empty_axes(fig) -> list:
    """Axes with nothing drawn in them (no points, bars, image or text)."""
    return [ax for ax in fig.axes if not (ax.collections or ax.patches or ax.images or ax.texts or ax.lines)]


def test_views_are_planned_beside_their_sections_and_no_panel_is_empty(tmp_path) -> None:
    run = _run(tmp_path)
    names = [plan.name for plan in plan_figures(run)]
    assert {"modality_maps", "factor_contributions", "factor_loadings"} <= set(names)
    assert names.index("markers_1_volcano") == names.index("markers_1") + 1  # the volcano follows its heatmap
    assert {p.section for p in plan_figures(run) if p.name.startswith(("modality", "factor"))} == {"modalities"}
    for name in ("modality_maps", "factor_contributions", "factor_loadings", "markers_1_volcano"):
        assert not _empty_axes(_drawn(run, name)), name


def test_factors_are_named_by_the_subtype_scoring_highest(tmp_path) -> None:
    def edit(results, arrays):
        arrays["factor_subtype_mean"] = np.array([[0.1, 0.0, 0.3], [0.5, 0.1, 0.0], [0.0, 0.2, 0.1]])
    assert factor_names(_run(tmp_path, edit)) == ["factor 1 (highest in S2)", "factor 2 (highest in S3)",
                                                  "factor 3 (highest in S1)"]


def test_a_modality_under_three_patients_gets_a_note_and_no_panel(tmp_path) -> None:
    def edit(results, arrays):
        results["cohort"]["modalities"][1]["patients"] = 2
        for key in ("modality_1_map", "modality_1_map_codes", "modality_1_map_variance"):
            del arrays[key]
        arrays["modality_separation"][1] = np.nan
    run = _run(tmp_path, edit)
    fig = _drawn(run, "modality_maps")
    maps = [ax for ax in fig.axes if ax.collections]
    assert len(maps) == 1 and maps[0].get_title(loc="left").startswith("rna")
    assert not _empty_axes(fig)
    page = render_html(run, [])  # the page without figures: the note stands on its own
    assert "methylation: no map, 2 patients measured (a map needs at least 3" in page


def test_volcano_drawn_for_a_layer_without_markers_and_an_untested_subtype_left_out(tmp_path) -> None:
    def edit(results, arrays):
        results["markers"][0]["rows"] = []
        arrays["volcano_0_p"][2] = np.nan
        arrays["volcano_0_difference"][2] = np.nan
    run = _run(tmp_path, edit)
    names = [plan.name for plan in plan_figures(run)]
    assert "markers_1" not in names and "markers_1_volcano" in names
    fig = _drawn(run, "markers_1_volcano")
    panels = [ax for ax in fig.axes if ax.collections]
    assert [ax.get_title(loc="left").split(":")[0] for ax in panels] == ["S1", "S2"] and not _empty_axes(fig)
    assert "not tested: S3" in fig.get_suptitle()


@pytest.mark.parametrize("kept", [(), ("volcano_",)])
def test_a_run_folder_without_the_view_arrays_draws_none_of_them(tmp_path, kept) -> None:
    def edit(results, arrays):
        for key in [k for k in arrays if k.startswith(NEW_ARRAYS) and not k.startswith(kept)]:
            del arrays[key]
    run = _run(tmp_path, edit)
    names = {plan.name for plan in plan_figures(run)}
    assert not names & {"modality_maps", "factor_contributions", "factor_loadings"}
    assert ("markers_1_volcano" in names) == bool(kept)
    page = render_html(run, [])
    assert 'id="modalities"' not in page and "no map" not in page
