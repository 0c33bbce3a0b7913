"""render_run on an invented run folder whose user strings try to break out of HTML, PDF and plots."""

from __future__ import annotations

import html
import json
import re
import shlex
import shutil
import subprocess
import zlib
from pathlib import Path

import matplotlib.image as mpimg
import numpy as np
import pytest
from report_fixture import HOSTILE_STRINGS, make_results, write_run_folder

from strataweave import InputError
from strataweave.caution import CAUTION
from strataweave.report import drawing_pool, render_run
from strataweave.report.figure_style import figure_bytes, new_figure, report_style
from strataweave.report.figures_outcome import draw_forest, draw_kaplan_meier
from strataweave.report.html_report import render_html
from strataweave.report.palette import subtype_colour
from strataweave.report.run_folder import load_run

def _as_html_escape_writes(page: str) -> str:
    """jinja2 writes quotes as &#34; and &#39;, html.escape as &quot; and &#x27; (equivalent entities)."""
    return page.replace("&#39;", "&#x27;").replace("&#34;", "&quot;")


def _results(root: Path) -> dict:
    return json.loads((root / "results.json").read_text(encoding="utf-8"))


def test_every_figure_written_as_png_and_svg(rendered):
    pngs = sorted(p.stem for p in (rendered / "figures").glob("*.png"))
    svgs = sorted(p.stem for p in (rendered / "figures").glob("*.svg"))
    assert pngs == svgs
    assert {"cohort_presence", "cohort_filters", "graph_agreement", "selection_evidence", "selection_consensus",
            "selection_split_flow", "subtype_sizes", "subtype_embedding", "subtype_confidence", "subtype_baselines",
            "modality_maps", "factor_contributions", "factor_loadings", "survival_kaplan_meier", "survival_cox_forest",
            "markers_1", "markers_1_volcano", "markers_2", "markers_2_volcano", "enrichment_dots"} == set(pngs)
    for name in pngs:
        image = mpimg.imread(rendered / "figures" / f"{name}.png")
        assert image.shape[0] > 200 and image.shape[1] > 400
        assert image[..., :3].std() > 0.05, f"{name}.png looks blank"
    assert not list(rendered.rglob("*.tmp")), "a temporary file of an atomic write was left behind"


def test_caution_at_top_and_bottom_of_html(page):
    escaped = html.escape(CAUTION)
    body = page[page.index("<body>"):]
    assert body.count(escaped) == 2
    first_section = body.index("<section")
    assert body.index(escaped) < first_section
    assert body.rindex(escaped) > body.rindex("</section>")


def test_html_is_self_contained(page):
    assert "<script" not in page.lower()
    assert not re.search(r"""(src|href)\s*=\s*["']?(https?:|//)""", page, flags=re.IGNORECASE)
    sources = re.findall(r'<img src="([^"]+)"', page)
    assert len(sources) == 20 and all(s.startswith("data:image/png;base64,") for s in sources)
    assert "default-src 'none'" in page


@pytest.mark.parametrize("raw", HOSTILE_STRINGS)
def test_user_strings_are_escaped(page, raw):
    # html.escape (standard library) is the reference for what an escaped string looks like.
    assert raw not in page
    assert html.escape(raw) in _as_html_escape_writes(page)


def _html_after_change(rendered: Path, tmp_path: Path, change) -> str:
    """The HTML of a copy of the rendered run whose results.json was changed by `change(results)`."""
    copy = shutil.copytree(rendered, tmp_path / "copy", ignore=shutil.ignore_patterns("figures"))
    results = _results(copy)
    change(results)
    (copy / "results.json").write_text(json.dumps(results), encoding="utf-8")
    return render_html(load_run(copy), [])


def test_no_patient_ids_unless_allowed(rendered, page, tmp_path):
    assert "PX-0" not in page
    allowed = _html_after_change(rendered, tmp_path, lambda r: r["report"].update(show_patient_ids=True))
    arrays = load_run(rendered).arrays
    core_ids = arrays["patient_ids"][arrays["core"]]
    assert len(core_ids) > 0 and all(str(i) in allowed for i in core_ids)
    assert not any(str(i) in allowed for i in arrays["patient_ids"][~arrays["core"]])


def test_numbers_come_from_results(rendered, page, tmp_path):
    results = _results(rendered)
    assert "permutation p = 0.001, 1000 permutations" in page
    assert "2.1</td><td>1.2</td><td>3.6</td><td>0.01" in page
    assert html.escape(results["selection"]["reason"]) in page

    def change(r):
        r["survival"]["logrank"]["p_value_permutation"] = 0.0371
        r["survival"]["cox"][0]["hazard_ratio"] = 2.345

    changed = _html_after_change(rendered, tmp_path, change)
    assert "permutation p = 0.0371" in changed and "<td>2.35</td>" in changed


def test_sections_methods_and_rerun_command(rendered, page):
    for section in ("at-a-glance", "cohort", "graphs", "how-many", "subtypes", "outcomes", "clinical", "markers", "enrichment",
                    "methods", "reproducibility"):
        assert f'<section id="{section}">' in page
    manifest = json.loads((rendered / "manifest.json").read_text())
    command = re.search(r'<pre id="rerun-command">(.*?)</pre>', page, flags=re.S).group(1)
    assert shlex.split(html.unescape(command)) == manifest["command"]
    assert html.escape(manifest["workflow"]["text"]) in _as_html_escape_writes(page)
    assert "graph weight 0.5" in page and "20 resamples of 0.8 of the patients" in page
    assert "Senbabaoglu Y" in page
    assert "Global Schoenfeld test of the Cox model: &chi;&sup2; = 9.2 (df 3),\np = 0.027." in page
    assert "not adjusted for multiplicity" in page and "global Schoenfeld test p = 0.027" in page
    assert '<section id="at-a-glance">' in page and page.index("at-a-glance\">") < page.index('id="cohort"')


def test_fusion_rule_and_partition_choices_are_shown_with_their_evidence(page):
    assert "How the fusion rule was chosen" in page and "<td>0.61</td>" in page and "<td>0.47</td>" in page
    assert "Which partition at each count" in page and "<td>fused graph</td>" in page and "<td>0.43</td>" in page
    assert "Strehl A" in page  # the methods text cites the agreement rule


def _subtype_pixels(path: Path, code: int) -> int:
    image = (mpimg.imread(path)[..., :3] * 255).round().astype(int)
    target = np.array([int(subtype_colour(code)[i:i + 2], 16) for i in (1, 3, 5)])
    return int(np.count_nonzero(np.all(image == target, axis=-1)))


@pytest.mark.parametrize("name", ["cohort_presence", "selection_consensus", "subtype_sizes", "subtype_confidence",
                                  "markers_1", "selection_split_flow"])
def test_each_subtype_keeps_its_colour(rendered, name):
    for code in range(3):
        assert _subtype_pixels(rendered / "figures" / f"{name}.png", code) > 20, (name, code)
    assert _subtype_pixels(rendered / "figures" / f"{name}.png", 3) == 0, "a fourth subtype colour appeared"


@pytest.mark.skipif(shutil.which("pdftotext") is None, reason="pdftotext (Debian poppler-utils) is not installed")
def test_caution_on_every_slide(rendered):
    text = subprocess.run(["pdftotext", str(rendered / "slides.pdf"), "-"], capture_output=True,
                          text=True, check=True).stdout
    pages = [p for p in text.split("\f") if p.strip()]
    assert len(pages) == 12  # the most a deck has
    for number, content in enumerate(pages, start=1):
        assert " ".join(CAUTION.split()) in " ".join(content.split()), f"caution missing on slide {number}"
        assert "PX-0" not in content
    info = subprocess.run(["pdfinfo", str(rendered / "slides.pdf")], capture_output=True, text=True).stdout
    width, height = map(float, re.search(r"Page size:\s+([\d.]+) x ([\d.]+)", info).groups())
    assert width / height == pytest.approx(16 / 9, rel=1e-3)


def test_given_groups_without_omics_leave_out_absent_sections(tmp_path):
    """The shape of an `evaluate` run: the user's groups, no modalities, no survival columns."""
    results, arrays = make_results(survival=False, markers=False, n=30)
    for key in ("graph", "selection", "baselines", "clinical", "parameters"):
        results.pop(key)
    results["cohort"]["modalities"] = []
    results["subtypes"]["given"] = True
    arrays = {k: v for k, v in arrays.items() if k in ("subtype_code", "confidence", "core")}
    arrays["presence"] = np.zeros((30, 0), dtype=bool)
    root = write_run_folder(tmp_path / "run", results, arrays, manifest={})
    finished = []
    written = render_run(root, progress=finished.append)
    assert finished == [1, 2, 3]
    page = written["html"].read_text(encoding="utf-8")
    for absent in ("outcomes", "how-many", "markers", "enrichment", "clinical", "graphs"):
        assert f'<section id="{absent}">' not in page
    assert "<h2>The groups</h2>" in page and "core patients" not in page
    assert "The manifest records no command line." in page
    assert sorted(p.stem for p in (root / "figures").glob("*.png")) == ["subtype_sizes"]
    assert written["pdf"].read_bytes().startswith(b"%PDF")


def test_bad_run_folders_raise_one_line_input_errors(tmp_path):
    with pytest.raises(InputError, match=r"results.json: file not found"):
        render_run(tmp_path)
    results, arrays = make_results(n=20)
    root = write_run_folder(tmp_path / "run", results, arrays)
    with pytest.raises(InputError, match="report formats: found 'docx'"):
        render_run(root, formats=("docx",))
    del results["survival"]["logrank"]["df"]
    (root / "results.json").write_text(json.dumps(results), encoding="utf-8")
    with pytest.raises(InputError, match=r"key 'survival.logrank.df' is missing") as error:
        render_run(root)
    assert "\n" not in str(error.value)
    (root / "results.json").write_text("{not json", encoding="utf-8")
    with pytest.raises(InputError, match="line 1: not valid JSON"):
        render_run(root)


def test_untested_survival_is_said_in_words(tmp_path):
    results, arrays = make_results(n=20)
    results["survival"]["not_tested"] = "not tested: too few events"
    results["survival"]["logrank"].update(statistic=None, df=None, p_value=None, p_value_permutation=None)
    results["survival"]["cox"] = [{"term": "group S2 vs S1", "hazard_ratio": None, "ci_lower": None,
                                   "ci_upper": None, "p_value": None}]
    run = load_run(write_run_folder(tmp_path / "run", results, arrays))
    page = render_html(run, [])
    assert "log-rank: not tested: too few events" in page
    with report_style():
        figures = {}
        for draw in (draw_forest, draw_kaplan_meier):
            figures[draw] = new_figure()
            draw(run, figures[draw])
            assert figure_bytes(figures[draw], "png").startswith(b"\x89PNG")
    forest_texts = [t.get_text() for ax in figures[draw_forest].axes for t in ax.texts]
    assert forest_texts == ["not estimable"]


def test_a_passed_hazards_check_is_said_without_overclaiming(tmp_path):
    results, arrays = make_results(n=20)
    results["survival"].update(ph_warning=None, ph_global={"statistic": 2.1, "df": 3, "p_value": 0.55})
    page = render_html(load_run(write_run_folder(tmp_path / "run", results, arrays)), [])
    assert "p = 0.55. The test finds no clear departure from proportional hazards" in page
    assert 'class="warning">The hazards do not look proportional' not in page


def test_rendering_again_removes_figures_it_no_longer_draws(tmp_path):
    results, arrays = make_results(n=20)
    root = write_run_folder(tmp_path / "run", results, arrays)
    (root / "figures").mkdir()
    for name in ("selection_criteria.png", "selection_criteria.svg"):
        (root / "figures" / name).write_bytes(b"from an earlier version")
    (root / "figures" / "notes.txt").write_text("kept", encoding="utf-8")
    render_run(root, formats=("html",))
    assert not list((root / "figures").glob("selection_criteria.*"))
    assert (root / "figures" / "selection_evidence.png").is_file() and (root / "figures" / "notes.txt").is_file()


def _pdf_streams(path: Path) -> list[bytes]:
    """The PDF's streams, inflated where compressed, with a negative zero written as zero: the
    sign of a zero coordinate can differ between processes whose BLAS kernels differ."""
    streams = []
    for raw in re.findall(rb"stream\n(.*?)\nendstream", path.read_bytes(), re.S):
        try:
            raw = zlib.decompress(raw)
        except zlib.error:
            pass
        streams.append(re.sub(rb"(?<![\d.])-0(?![\d.])", b"0", raw))
    return streams


def test_workers_and_one_process_draw_the_same_files(tmp_path, monkeypatch):
    results, arrays = make_results(n=40)
    pooled = write_run_folder(tmp_path / "pooled", results, arrays)
    here = write_run_folder(tmp_path / "here", results, arrays)
    monkeypatch.setattr(drawing_pool, "available_cores", lambda: 2)
    render_run(pooled)
    monkeypatch.setattr(drawing_pool, "available_cores", lambda: 1)
    render_run(here)
    names = sorted(p.name for p in (here / "figures").iterdir())
    assert names == sorted(p.name for p in (pooled / "figures").iterdir()) and len(names) > 10
    for name in names:
        assert (pooled / "figures" / name).read_bytes() == (here / "figures" / name).read_bytes(), name
    assert _pdf_streams(pooled / "slides.pdf") == _pdf_streams(here / "slides.pdf")
    assert (pooled / "report.html").read_text(encoding="utf-8") == (here / "report.html").read_text(encoding="utf-8")
