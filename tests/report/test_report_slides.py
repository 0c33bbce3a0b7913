"""The slide deck tells the report's story: at most 12 pages with sentence titles, no text off the page,
no machine name, ties said as ties; and the findings that open the report and the deck."""

from __future__ import annotations

import shutil
import subprocess

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg, RendererAgg
from report_fixture import make_results, write_run_folder

from strataweave.report import render_run
from strataweave.report.figure_style import new_figure, report_style
from strataweave.report.figures_evidence import draw_count_evidence, goodness
from strataweave.report.findings import clinical_finding, findings, survival_finding
from strataweave.report.run_folder import load_run
from strataweave.report.slide_pages import SlideDeck
from strataweave.report.slides import MAX_SLIDES, render_slides

#: machine names of results.json that people must never read in the report or the slides
MACHINE_NAMES = ("kruskal_wallis", "cramers_v", "epsilon_squared", "missing_filter", "variance_filter",
                 "scaled_exponential", "age_years", "chi_square", "mann_whitney", "p_adjusted", "effect_size")
LONG_TITLE = "A very long run title of a fictional biobank " * 4


@pytest.fixture(scope="module")
def slide_pages(tmp_path_factory):
    """Every page of the deck of a run with a long title, as the texts drawn on it (tick labels outside the
    view limits are never drawn, so they are not counted)."""
    results, arrays = make_results(title=LONG_TITLE)
    run = load_run(write_run_folder(tmp_path_factory.mktemp("slides") / "run", results, arrays))
    figures, drawn = [], []
    draw_text = RendererAgg.draw_text

    def recording(renderer, gc, x, y, s, prop, angle, ismath=False, mtext=None):
        if mtext is not None and s.strip():
            drawn[-1].append(mtext)
        return draw_text(renderer, gc, x, y, s, prop, angle, ismath, mtext)

    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(SlideDeck, "save", lambda deck, fig: figures.append(fig))
        render_slides(run)
        patch.setattr(RendererAgg, "draw_text", recording)
        for fig in figures:
            drawn.append([])
            FigureCanvasAgg(fig).draw()
    return list(zip(figures, drawn))


def test_at_most_twelve_pages_each_titled_by_a_sentence(slide_pages):
    assert 8 <= len(slide_pages) <= MAX_SLIDES
    titles = [max(texts, key=lambda t: t.get_fontsize()).get_text() for _, texts in slide_pages]
    assert titles[1] == "In short: the data support 3 subtypes"
    assert "Subtype S2 has the worst survival" in titles  # the lowest restricted mean survival of the fixture
    for title in titles[1:]:
        words = title.split()
        assert len(words) >= 4 and any(w.endswith(("s", "ed")) or w in {"has", "is", "are"} for w in words), title


def test_no_text_runs_off_a_page(slide_pages):
    for number, (fig, texts) in enumerate(slide_pages, start=1):
        page = fig.bbox
        for text in texts:
            box = text.get_window_extent()
            assert (box.x0 >= page.x0 - 1 and box.x1 <= page.x1 + 1 and box.y0 >= page.y0 - 1
                    and box.y1 <= page.y1 + 1), f"slide {number}: {text.get_text()[:50]!r} runs off the page"


def test_the_evidence_figure_labels_every_criterion_and_count_and_frames_the_count_used(tmp_path):
    results, arrays = make_results()
    results["selection"]["criteria"].update(stability=[0.5, 0.9, 0.6], modularity=[0.3, 0.4, 0.35])
    fig = new_figure((12, 7))
    with report_style():
        draw_count_evidence(load_run(write_run_folder(tmp_path / "run", results, arrays)), fig)
    FigureCanvasAgg(fig).draw()
    (ax,) = fig.axes
    rows = [t.get_text() for t in ax.get_yticklabels()]
    assert rows[0] == "PAC\n(lower is better)" and rows[3] == "eigengap\n(higher is better)"
    assert len(rows) == len(results["selection"]["criteria"])
    assert [t.get_text() for t in ax.get_xticklabels()] == ["2", "3\nrecommended", "4"]
    cells = {t.get_text() for t in ax.texts}
    assert {"0.05", "0.99", "0.45", "0.4"} <= cells  # every value is written in its cell
    # 8 patients in the smallest subtype at count 4 is below min_size 10: that column is hatched
    assert [p.get_hatch() for p in ax.patches if p.get_hatch()] == ["//"]


def test_goodness_runs_from_the_worst_to_the_best_count_in_the_criterion_direction():
    assert goodness([0.2, 0.05, 0.3], higher_is_better=False).tolist() == pytest.approx([0.4, 1.0, 0.0])
    assert goodness([0.1, 0.4, None], higher_is_better=True)[:2].tolist() == pytest.approx([0.0, 1.0])
    assert np.isnan(goodness([25, 8, 3], higher_is_better=None)).all()


def test_a_tie_for_the_strongest_clinical_association_is_said_as_a_tie(tmp_path):
    results, arrays = make_results()
    for row in results["clinical"]:
        row["p_adjusted"] = 0.0016
    run = load_run(write_run_folder(tmp_path / "run", results, arrays))
    found = clinical_finding(run)
    assert found.headline == "The subtypes differ in stage and age (years), tied for the strongest"
    assert "2 variables share the lowest adjusted p = 0.0016" in found.detail
    assert "Cram\u00e9r's V 0.31" in found.detail and "epsilon squared 0.02" in found.detail
    results["clinical"][1]["p_adjusted"] = 0.3
    single = clinical_finding(load_run(write_run_folder(tmp_path / "single", results, arrays)))
    assert single.headline == "The subtypes differ most in stage" and "tied" not in single.detail


def test_survival_finding_names_the_worst_group_only_when_the_log_rank_test_says_so(tmp_path):
    results, arrays = make_results()
    results["survival"]["logrank"]["p_value"] = 0.003
    found = survival_finding(load_run(write_run_folder(tmp_path / "a", results, arrays)))
    assert found.headline == "Subtype S2 has the worst survival"
    assert "S2 19.4, S3 31" in found.detail and "hazard ratio S2 vs S1 2.1 (95% CI 1.2-3.6)" in found.detail
    results["survival"]["logrank"]["p_value"] = 0.4
    found = survival_finding(load_run(write_run_folder(tmp_path / "b", results, arrays)))
    assert found.headline == "Survival does not differ clearly between the subtypes"


def test_findings_name_the_strongest_marker_and_gene_set(tmp_path):
    results, arrays = make_results()
    results["markers"][1]["rows"][4]["auc"] = 0.97
    found = {f.topic: f for f in findings(load_run(write_run_folder(tmp_path / "run", results, arrays)))}
    feature = results["markers"][1]["rows"][4]["feature"]
    modality = results["markers"][1]["modality"]
    assert found["markers"].headline == f"{feature} ({modality}) marks subtype S2 most strongly"
    assert found["enrichment"].headline == "Markers of S1 are over-represented in FX set 0-0"
    assert list(found) == ["count", "survival", "clinical", "markers", "enrichment"]


@pytest.mark.skipif(shutil.which("pdftotext") is None, reason="pdftotext (Debian poppler-utils) is not installed")
def test_no_machine_name_in_the_html_or_the_slides(tmp_path):
    results, arrays = make_results()
    root = write_run_folder(tmp_path / "run", results, arrays)
    render_run(root)
    page = (root / "report.html").read_text(encoding="utf-8")
    shown = page[: page.index('<section id="reproducibility">')]  # the workflow file as run is shown verbatim below
    slides = subprocess.run(["pdftotext", str(root / "slides.pdf"), "-"], capture_output=True, text=True,
                            check=True).stdout
    for name in MACHINE_NAMES:
        assert name not in shown, name
        assert name not in slides, name


def test_no_markers_say_so_instead_of_drawing_empty_heatmaps(tmp_path):
    results, arrays = make_results()
    for block in results["markers"]:
        block["rows"] = []
    root = write_run_folder(tmp_path / "run", results, arrays)
    render_run(root)
    page = (root / "report.html").read_text(encoding="utf-8")
    assert page.count('class="note no-markers"') == len(results["markers"])
    # no heatmap without rows; the volcano of every feature tested still shows why there is no marker
    assert {path.stem for path in (root / "figures").glob("markers_*.png")} == {
        f"markers_{i + 1}_volcano" for i in range(len(results["markers"]))}
