"""The comparison page: the agreement of two runs in words and numbers, the figure inlined, the caution twice.

Self-contained like the report (the same head and styles, no network); counts only, no patient identifiers.
"""

from __future__ import annotations

import base64

from strataweave.report.comparison_view import ComparisonView
from strataweave.report.html_report import template_environment
from strataweave.report.tables import Table

TEMPLATE = "comparison.html.j2"


def contingency_table(view: ComparisonView) -> Table:
    """Run A's subtypes as rows, run B's as columns, with the totals of both."""
    counts = view.counts
    header = ["run A \\ run B", *view.labels_b, "total"]
    rows = [[label, *map(str, row), str(row.sum())] for label, row in zip(view.labels_a, counts)]
    rows.append(["total", *map(str, counts.sum(axis=0)), str(counts.sum())])
    return Table(header, rows)


def render_comparison_html(view: ComparisonView, figure_png: bytes, figure_name: str) -> str:
    """The page as one HTML string, the figure embedded as a data URI."""
    return template_environment().get_template(TEMPLATE).render(
        title=f"Comparison of {view.name_a} and {view.name_b}",
        caution=view.caution,
        view=view,
        contingency=contingency_table(view),
        figure_name=figure_name,
        figure_source="data:image/png;base64," + base64.b64encode(figure_png).decode("ascii"),
    )
