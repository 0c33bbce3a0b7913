"""PDF slides for a lab meeting: 16:9 pages, large fonts, the caution in every page's footer."""

from __future__ import annotations

import io
import textwrap
from typing import Callable

from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.figure import Figure, SubFigure

from strataweave.report import figures_biology, figures_cohort, figures_outcome, figures_selection, figures_subtypes
from strataweave.report.figure_catalogue import marker_blocks
from strataweave.report.figure_style import report_style
from strataweave.report.formatting import format_p, plot_text, shorten
from strataweave.report.palette import NEUTRAL
from strataweave.report.run_folder import RunView
from strataweave.report.tables import Table, rows_table

PAGE_SIZE = (13.333, 7.5)  # inches, 16:9
TITLE_SIZE = 28
TEXT_SIZE = 20
FOOTER_SIZE = 10.5
MAX_TABLE_ROWS = 10
BULLET_WIDTH = 90

Draw = Callable[[RunView, Figure | SubFigure], None]


class SlideDeck:
    """Pages added one by one; each gets a title, a body and the caution footer."""

    def __init__(self, run: RunView, pdf: PdfPages) -> None:
        self.run = run
        self.pdf = pdf
        self.pages = 0

    def page(self, title: str, subtitle: str = "") -> tuple[Figure, SubFigure]:
        fig = Figure(figsize=PAGE_SIZE, layout="constrained")
        head, body, foot = fig.subfigures(3, 1, height_ratios=[0.13 if not subtitle else 0.18, 0.72, 0.1])
        head.text(0.02, 0.95, plot_text(title), fontsize=TITLE_SIZE, fontweight="bold", va="top")
        if subtitle:
            head.text(0.02, 0.3, plot_text(textwrap.fill(subtitle, 110)), fontsize=15, va="center", color=NEUTRAL)
        self.pages += 1
        head.text(0.985, 0.95, str(self.pages), fontsize=FOOTER_SIZE, ha="right", va="top", color=NEUTRAL)
        foot.text(0.02, 0.5, textwrap.fill(self.run.results["caution"], 175), fontsize=FOOTER_SIZE, va="center",
                  color=NEUTRAL)
        return fig, body

    def figure_page(self, title: str, draws: list[Draw], subtitle: str = "") -> None:
        fig, body = self.page(title, subtitle)
        panels = body.subfigures(1, len(draws)) if len(draws) > 1 else [body]
        for draw, panel in zip(draws, panels):
            draw(self.run, panel)
        self.pdf.savefig(fig)

    def text_page(self, title: str, lines: list[str], size: float = TEXT_SIZE) -> None:
        fig, body = self.page(title)
        wrapped = [textwrap.fill(line, BULLET_WIDTH, subsequent_indent="   ") for line in lines]
        body.text(0.04, 0.95, "\n".join(plot_text(line) for line in wrapped), fontsize=size, va="top",
                  linespacing=1.5)
        self.pdf.savefig(fig)

    def table_page(self, title: str, table: Table) -> None:
        fig, body = self.page(title)
        ax = body.subplots()
        ax.axis("off")
        rows = [[plot_text(shorten(cell, 34)) for cell in row] for row in table.rows[:MAX_TABLE_ROWS]]
        if rows:
            drawn = ax.table(cellText=rows, colLabels=[plot_text(h) for h in table.header], loc="upper center",
                             cellLoc="left")
            drawn.auto_set_font_size(False)
            drawn.set_fontsize(15)
            drawn.auto_set_column_width(list(range(len(table.header))))
            drawn.scale(1.0, 2.0)
        hidden = len(table.rows) - len(rows)
        if hidden > 0:
            ax.text(0.0, 0.0, f"{hidden} more rows in report.html", fontsize=14, transform=ax.transAxes)
        self.pdf.savefig(fig)


def _title_lines(run: RunView) -> list[str]:
    results = run.results
    cohort = results["cohort"]
    layers = len(cohort["modalities"])
    lines = [f"{cohort['patients']} patients, {layers} omics layer{'' if layers == 1 else 's'}, "
             f"{results['subtype_count']} {run.group_word}s"]
    if "created" in run.manifest:
        lines.append(f"run started {run.manifest['created']}")
    return lines


def _summary_lines(run: RunView) -> list[str]:
    results = run.results
    sizes = ", ".join(f"{shorten(label, 16)}: {size}" for label, size in zip(run.labels, results["subtypes"]["sizes"]))
    lines = [f"\u2022 {results['subtype_count']} {run.group_word}s ({sizes})"]
    if run.has("selection"):
        lines.append("\u2022 " + results["selection"]["reason"])
    if run.has("survival"):
        lines.append("\u2022 " + figures_outcome.logrank_sentence(results["survival"]))
        if results["survival"].get("ph_warning"):
            lines.append("\u2022 " + results["survival"]["ph_warning"])
    if run.has("clinical"):
        strongest = min(results["clinical"], key=lambda r: (r["p_adjusted"] is None, r["p_adjusted"] or 0))
        lines.append(f"\u2022 strongest clinical association: {shorten(strongest['variable'], 30)} "
                     f"(adjusted p = {format_p(strongest['p_adjusted'])})")
    if run.has("enrichment"):
        top = figures_biology.enrichment_rows(run)[:1]
        if top:
            lines.append(f"\u2022 top gene set: {shorten(top[0]['gene_set'], 40)} in {shorten(top[0]['subtype'], 16)} "
                         f"(adjusted p = {format_p(top[0]['p_adjusted'])})")
    lines.append("\u2022 details, tables, methods and the rerun command: report.html")
    return lines


def render_slides(run: RunView) -> bytes:
    """The slide deck as PDF bytes."""
    results = run.results
    buffer = io.BytesIO()
    with report_style(), PdfPages(buffer, metadata={"Title": run.title, "Creator": "strataweave",
                                                    "CreationDate": None}) as pdf:
        deck = SlideDeck(run, pdf)
        deck.text_page(run.title, _title_lines(run), size=24)
        if run.has_modalities:
            deck.figure_page("Cohort", [figures_cohort.draw_presence, figures_cohort.draw_filters])
        if run.has("selection"):
            selection = results["selection"]
            subtitle = f"Recommended: {selection['recommended']}. {selection['reason']}"
            deck.figure_page("How many subtypes", [figures_selection.draw_criteria], subtitle)
            deck.figure_page("How many subtypes: consensus", [figures_selection.draw_consensus])
            if selection.get("flow"):
                deck.figure_page("How many subtypes: splits", [figures_selection.draw_split_flow])
        subtype_draws: list[Draw] = [figures_subtypes.draw_sizes]
        if "embedding" in run.arrays:
            subtype_draws.insert(0, figures_subtypes.draw_embedding)
        deck.figure_page(f"The {run.group_word}s", subtype_draws)
        if run.has("survival"):
            survival = results["survival"]
            deck.figure_page("Survival", [figures_outcome.draw_kaplan_meier], survival.get("not_tested") or "")
            if survival["cox"]:
                deck.figure_page("Survival: Cox model", [figures_outcome.draw_forest], survival.get("ph_warning") or "")
        if run.has("clinical"):
            deck.table_page("Clinical associations", rows_table(
                results["clinical"], ["variable", "test", "effect_size", "effect_size_name", "p_adjusted"]))
        for index, block in marker_blocks(run):
            deck.figure_page(f"Markers: {shorten(block['modality'], 40)}",
                             [lambda r, c, i=index: figures_biology.draw_marker_heatmap(r, c, i)])
        if run.has("enrichment") and figures_biology.enrichment_rows(run):
            deck.figure_page("Enrichment", [figures_biology.draw_enrichment])
        if run.not_run:
            deck.text_page("Analyses not run", [f"\u2022 {line}" for line in run.not_run_sentences()])
        deck.text_page("Summary", _summary_lines(run))
    return buffer.getvalue()
