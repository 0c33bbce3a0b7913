"""Slide page layouts: a sentence title, a body (figures, a table, findings or lines) and the caution footer.

Titles and text are wrapped to the page and shrunk when long, so nothing runs off a 16:9 page.
"""

from __future__ import annotations

import textwrap
from typing import Callable

from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.figure import Figure, SubFigure

from strataweave.report.findings import Finding
from strataweave.report.formatting import plot_text, shorten
from strataweave.report.palette import ACCENT, NEUTRAL
from strataweave.report.run_folder import RunView
from strataweave.report.tables import Table

PAGE_SIZE = (13.333, 7.5)  # inches, 16:9
TITLE_SIZE = 26
FOOTER_SIZE = 10.5
MAX_TABLE_ROWS = 12
BODY_POINTS = 0.7 * PAGE_SIZE[1] * 72  # height of the body in points
CHARACTER_WIDTH = 0.55  # mean glyph width of DejaVu Sans in units of its size (common estimate)

Draw = Callable[[RunView, Figure | SubFigure], None]


def wrap_to(text: str, size: float, width_inches: float, max_lines: int) -> str:
    """`text` wrapped to lines that fit `width_inches` at font `size`; beyond `max_lines`, cut with an ellipsis."""
    per_line = max(10, int(width_inches * 72 / (CHARACTER_WIDTH * size)))
    lines = textwrap.wrap(text, per_line) or [""]
    if len(lines) > max_lines:
        lines = lines[: max_lines - 1] + [shorten(" ".join(lines[max_lines - 1:]), per_line)]
    return "\n".join(lines)


class SlideDeck:
    """Pages added one by one; each gets a sentence title, a body and the caution footer."""

    def __init__(self, run: RunView, pdf: PdfPages) -> None:
        self.run = run
        self.pdf = pdf
        self.pages = 0

    def save(self, fig: Figure) -> None:
        self.pdf.savefig(fig)

    def page(self, title: str, subtitle: str = "") -> tuple[Figure, SubFigure]:
        fig = Figure(figsize=PAGE_SIZE, layout="constrained")
        head, body, foot = fig.subfigures(3, 1, height_ratios=[0.2, 0.7, 0.1])
        width = PAGE_SIZE[0] * 0.9
        size = TITLE_SIZE if len(title) * CHARACTER_WIDTH * TITLE_SIZE < width * 72 else TITLE_SIZE - 4
        head.text(0.02, 0.96, plot_text(wrap_to(title, size, width, 2)), fontsize=size, fontweight="bold",
                  va="top", color=NEUTRAL)
        if subtitle:
            head.text(0.02, 0.04, plot_text(wrap_to(subtitle, 14, PAGE_SIZE[0] * 0.95, 2)), fontsize=14,
                      va="bottom", color=NEUTRAL)
        self.pages += 1
        head.text(0.985, 0.96, str(self.pages), fontsize=FOOTER_SIZE, ha="right", va="top", color=NEUTRAL)
        foot.text(0.02, 0.5, textwrap.fill(self.run.results["caution"], 175), fontsize=FOOTER_SIZE, va="center",
                  color=NEUTRAL)
        return fig, body

    def figure_page(self, title: str, draws: list[Draw], subtitle: str = "", columns: int = 2) -> None:
        fig, body = self.page(title, subtitle)
        if len(draws) == 1:
            draws[0](self.run, body)
        else:
            rows = -(-len(draws) // columns)
            panels = body.subfigures(rows, min(columns, len(draws)), squeeze=False).ravel()
            for draw, panel in zip(draws, panels):
                draw(self.run, panel)
        self.save(fig)

    def lines_page(self, title: str, lines: list[str], size: float = 20) -> None:
        fig, body = self.page(title)
        wrapped = [wrap_to(line, size, PAGE_SIZE[0] * 0.9, 3) for line in lines]
        body.text(0.04, 0.95, "\n".join(plot_text(line) for line in wrapped), fontsize=size, va="top",
                  linespacing=1.5, color=NEUTRAL)
        self.save(fig)

    def findings_page(self, title: str, findings: list[Finding], not_run: list[str]) -> None:
        """Each finding as a bold headline over its numbers, then the analyses not run; all sizes shrink
        together until they fit."""
        notes = ["Analyses not run:", *not_run] if not_run else []
        fig, body = self.page(title)
        width = PAGE_SIZE[0] * 0.88
        for scale in (1.2, 1.1, 1.0, 0.9, 0.8, 0.7, 0.6):
            big, small = 19 * scale, 13 * scale
            blocks = [(wrap_to(f.headline, big, width, 2), wrap_to(f.detail, small, width, 4)) for f in findings]
            notes_text = [wrap_to(note, small, width, 2) for note in notes]
            needed = sum(1.35 * (big * (h.count("\n") + 1) + small * (d.count("\n") + 1)) + 8 * scale
                         for h, d in blocks) + sum(1.35 * small * (n.count("\n") + 1) for n in notes_text)
            if needed <= BODY_POINTS * 0.95:
                break
        y = 0.98
        for head, detail in blocks:
            body.text(0.03, y, plot_text(head), fontsize=big, fontweight="bold", va="top", color=NEUTRAL)
            body.text(0.012, y, "\u25a0", fontsize=big * 0.8, va="top", color=ACCENT)
            y -= 1.35 * big * (head.count("\n") + 1) / BODY_POINTS
            body.text(0.03, y, plot_text(detail), fontsize=small, va="top", color=NEUTRAL, linespacing=1.35)
            y -= (1.35 * small * (detail.count("\n") + 1) + 8 * scale) / BODY_POINTS
        for note in notes_text:
            body.text(0.03, y, plot_text(note), fontsize=small, va="top", color=NEUTRAL, style="italic")
            y -= 1.35 * small * (note.count("\n") + 1) / BODY_POINTS
        self.save(fig)

    def table_page(self, title: str, table: Table, subtitle: str = "") -> None:
        fig, body = self.page(title, subtitle)
        ax = body.subplots()
        ax.axis("off")
        rows = [[plot_text(shorten(cell, 30)) for cell in row] for row in table.rows[:MAX_TABLE_ROWS]]
        if rows:
            drawn = ax.table(cellText=rows, colLabels=[plot_text(h) for h in table.header], loc="upper center",
                             cellLoc="left")
            drawn.auto_set_font_size(False)
            drawn.set_fontsize(14 if len(rows) <= 8 else 12)
            drawn.auto_set_column_width(list(range(len(table.header))))
            drawn.scale(1.0, 1.8 if len(rows) <= 8 else 1.5)
        hidden = len(table.rows) - len(rows)
        if hidden > 0:
            ax.text(0.0, 0.0, f"{hidden} more rows in report.html", fontsize=13, transform=ax.transAxes)
        self.save(fig)
