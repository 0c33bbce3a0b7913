"""Render a run folder (figures/ as PNG + SVG, report.html, slides.pdf) or a comparison of two runs, written atomically."""

from __future__ import annotations

from pathlib import Path
from typing import Callable, Iterable

from strataweave.errors import InputError
from strataweave.files import atomic_write_bytes, atomic_write_text
from strataweave.report.comparison_page import render_comparison_html
from strataweave.report.comparison_view import ComparisonView
from strataweave.report.contract import COMPARISON_FIGURE, COMPARISON_PAGE
from strataweave.report.drawing_pool import drawing_pool, on_run
from strataweave.report.figure_catalogue import draw_figures, plan_figures
from strataweave.report.figure_style import new_figure, report_style, save_figure
from strataweave.report.figures_comparison import FIGURE_SIZE as COMPARISON_SIZE
from strataweave.report.figures_comparison import draw_comparison
from strataweave.report.html_report import render_html
from strataweave.report.run_folder import load_run
from strataweave.report.slides import render_slides

FORMATS = ("html", "pdf")
REPORT_FILE = "report.html"
SLIDES_FILE = "slides.pdf"


def render_run(run_dir: str | Path, formats: Iterable[str] = FORMATS,
               progress: Callable[[int], None] | None = None) -> dict[str, Path]:
    """Draw the figures and write the requested formats; return {"figures"|"html"|"pdf": path}.

    Reads only results.json, stages/figure_data.npz and manifest.json; computes no statistics.
    The slides and the figures are drawn side by side on forked workers (see `drawing_pool`).
    `progress`, when given, is called with the number of finished pieces (figures, then each format).
    """
    formats = tuple(formats)
    unknown = [f for f in formats if f not in FORMATS]
    if unknown:
        raise InputError(f"report formats: found {unknown[0]!r}; expected some of {', '.join(FORMATS)}")
    run = load_run(run_dir)
    with drawing_pool(run, len(plan_figures(run)) + ("pdf" in formats)) as pool:
        slides = pool.submit(on_run, render_slides) if pool is not None and "pdf" in formats else None
        figures = draw_figures(run, progress=progress, pool=pool)
        written = {"figures": run.run_dir / "figures"}
        done = len(figures)
        if "html" in formats:
            written["html"] = run.run_dir / REPORT_FILE
            atomic_write_text(written["html"], render_html(run, figures))
            done += 1
            if progress is not None:
                progress(done)
        if "pdf" in formats:
            written["pdf"] = run.run_dir / SLIDES_FILE
            atomic_write_bytes(written["pdf"], render_slides(run) if slides is None else slides.result())
            if progress is not None:
                progress(done + 1)
    return written


def render_comparison(out: str | Path, view: ComparisonView) -> dict[str, Path]:
    """Write the comparison figure (PNG + SVG) and its HTML page into `out`; return {"figure"|"html": path}."""
    out = Path(out)
    with report_style():
        fig = new_figure(COMPARISON_SIZE)
        draw_comparison(view, fig)
        png = save_figure(fig, out, COMPARISON_FIGURE)
    atomic_write_text(out / COMPARISON_PAGE, render_comparison_html(view, png, COMPARISON_FIGURE))
    return {"figure": out / f"{COMPARISON_FIGURE}.png", "html": out / COMPARISON_PAGE}
