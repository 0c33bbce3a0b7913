"""The comparison figure: the contingency heatmap of two partitions beside the labelled flow between them.

Run A's subtypes take the subtype colours and run B's are drawn in greys, so no colour names two
different groups of patients; the caution is written into the figure itself.
"""

from __future__ import annotations

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from strataweave.report.comparison_view import ComparisonView
from strataweave.report.figure_style import cell_borders
from strataweave.report.flow_bands import FlowBand, FlowColumn, draw_flow
from strataweave.report.formatting import plot_text, shorten
from strataweave.report.palette import NEUTRAL, SEQUENTIAL, alternating_grey, subtype_colour
from strataweave.report.slide_pages import wrap_to

FIGURE_SIZE = (14.0, 7.5)
DARK_TEXT_ABOVE = 0.6  # row share above which a cell's count is written in white
CAUTION_SIZE = 10.5


def draw_contingency(view: ComparisonView, ax: Axes) -> None:
    """Patients in each pair of subtypes, shaded by the share of run A's subtype (its row) they hold."""
    counts, shares = view.counts, view.row_shares
    image = ax.imshow(shares, cmap=SEQUENTIAL, vmin=0, vmax=1, aspect="auto")
    rows, columns = np.indices(counts.shape)
    for row, column, count, share in zip(rows.ravel(), columns.ravel(), counts.ravel(), shares.ravel()):
        ax.text(column, row, str(count), ha="center", va="center", fontsize=12,
                color="white" if share > DARK_TEXT_ABOVE else NEUTRAL)
    ax.set_xticks(range(counts.shape[1]), [f"{shorten(plot_text(label), 14)}\n({total})"
                                           for label, total in zip(view.labels_b, counts.sum(axis=0))])
    ax.set_yticks(range(counts.shape[0]), [f"{shorten(plot_text(label), 14)} ({total})"
                                           for label, total in zip(view.labels_a, counts.sum(axis=1))])
    ax.xaxis.tick_top()
    ax.xaxis.set_label_position("top")
    ax.set_xlabel(f"run B: {shorten(plot_text(view.name_b), 40)} (patients)")
    ax.set_ylabel(f"run A: {shorten(plot_text(view.name_a), 40)} (patients)")
    ax.tick_params(length=0)
    ax.spines[:].set_visible(False)
    cell_borders(ax, *counts.shape)
    ax.figure.colorbar(image, ax=ax, location="bottom", shrink=0.7, pad=0.04,
                       label="share of the run A subtype (row) in this cell")


def draw_comparison_flow(view: ComparisonView, ax: Axes) -> None:
    """Run A's subtypes (left) joined to run B's (right) by bands as wide as the patients they share."""
    counts = view.counts
    left = FlowColumn(counts.sum(axis=1), [f"{plot_text(label)} {total}" for label, total in
                                           zip(view.labels_a, counts.sum(axis=1))],
                      [subtype_colour(code) for code in range(counts.shape[0])], side="left", emphasis=True)
    right = FlowColumn(counts.sum(axis=0), [f"{plot_text(label)} {total}" for label, total in
                                            zip(view.labels_b, counts.sum(axis=0))],
                       [alternating_grey(code) for code in range(counts.shape[1])],
                       emphasis=True)
    sources, targets = np.nonzero(counts)
    bands = [FlowBand(0, int(s), int(t), int(counts[s, t]), subtype_colour(int(s))) for s, t in zip(sources, targets)]
    draw_flow(ax, [left, right], bands, [f"run A: {shorten(plot_text(view.name_a), 24)}",
                                         f"run B: {shorten(plot_text(view.name_b), 24)}"])
    ax.set_xlim(-0.75, 1.55)
    ax.set_ylabel("patients in both runs (stacked)")


def draw_comparison(view: ComparisonView, fig: Figure) -> None:
    """Heatmap and flow side by side, titled with the agreement, the caution along the foot."""
    body, foot = fig.subfigures(2, 1, height_ratios=[0.9, 0.1])
    heatmap_ax, flow_ax = body.subplots(1, 2, width_ratios=[1, 1.15])
    draw_contingency(view, heatmap_ax)
    heatmap_ax.set_title("Patients in each pair of subtypes", fontsize=13, loc="left", pad=12)
    draw_comparison_flow(view, flow_ax)
    flow_ax.set_title("Where each subtype of run A went", fontsize=13, loc="left")
    body.suptitle(f"Agreement of two runs over {view.n_patients} shared patients: "
                  f"ARI {view.ari:.2f}, NMI {view.nmi:.2f} (1 = identical)")
    foot.text(0.01, 0.5, wrap_to(view.caution, CAUTION_SIZE, fig.get_figwidth() * 0.95, 2), fontsize=CAUTION_SIZE,
              va="center", color=NEUTRAL)
