"""The decision figure for the subtype count: every criterion at every count in one scorecard.

Each row is a criterion, each column a count; the shade says how good that count is on that
criterion among the counts tried (light worst, dark best), the value is written in the cell, the
chosen count is framed, and counts the size rule excludes are hatched.
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure, SubFigure
from matplotlib.patches import Rectangle

from strataweave.report.figure_style import cell_borders
from strataweave.report.formatting import format_value, plot_text
from strataweave.report.palette import NEUTRAL, NEUTRAL_LIGHT, PAPER, SEQUENTIAL
from strataweave.report.run_folder import RunView
from strataweave.report.wording import words

Canvas = Figure | SubFigure
SIZE_CRITERIA = ("smallest_subtype", "smallest_size")
DARK_TEXT_ABOVE = 0.6  # shade above which a cell's value is written in white


def goodness(values: list, higher_is_better: bool | None) -> np.ndarray:
    """Each value's place between the worst (0) and the best (1) count; NaN without a direction or a value."""
    v = np.array([np.nan if x is None else x for x in values], dtype=float)
    if higher_is_better is None or np.all(np.isnan(v)):
        return np.full(v.shape, np.nan)
    low, high = np.nanmin(v), np.nanmax(v)
    if high == low:
        return np.where(np.isnan(v), np.nan, 1.0)
    share = (v - low) / (high - low)
    return share if higher_is_better else 1.0 - share


def _too_small(run: RunView, counts: list[int]) -> np.ndarray:
    """Counts whose smallest subtype is below the size rule's minimum."""
    selection = run.results["selection"]
    minimum = ((run.results.get("parameters") or {}).get("subtypes") or {}).get("min_size")
    sizes = next((selection["criteria"][name] for name in SIZE_CRITERIA if name in selection["criteria"]), None)
    if minimum is None or sizes is None:
        return np.zeros(len(counts), dtype=bool)
    return np.array([size is not None and size < minimum for size in sizes])


def draw_count_evidence(run: RunView, fig: Canvas) -> None:
    """The scorecard of criteria (rows) against subtype counts (columns)."""
    selection = run.results["selection"]
    counts = list(selection["counts"])
    directions = selection.get("higher_is_better", {})
    names = list(selection["criteria"])
    shades = np.vstack([goodness(selection["criteria"][n], directions.get(n)) for n in names])
    ax = fig.subplots()
    ax.imshow(np.where(np.isnan(shades), 0.0, shades), cmap=SEQUENTIAL, vmin=0, vmax=1, aspect="auto")
    for row, name in enumerate(names):
        for column, value in enumerate(selection["criteria"][name]):
            shade = shades[row, column]
            if np.isnan(shade):
                ax.add_patch(Rectangle((column - 0.5, row - 0.5), 1, 1, facecolor=PAPER, edgecolor="none"))
            ax.text(column, row, format_value(value), ha="center", va="center", fontsize=12,
                    color="white" if shade > DARK_TEXT_ABOVE else NEUTRAL)
    for column in np.flatnonzero(_too_small(run, counts)):
        ax.add_patch(Rectangle((column - 0.5, -0.5), 1, len(names), facecolor="none", edgecolor=NEUTRAL_LIGHT,
                               hatch="//", linewidth=0))
    chosen = counts.index(run.results["subtype_count"]) if run.results["subtype_count"] in counts else None
    if chosen is not None:
        ax.add_patch(Rectangle((chosen - 0.5, -0.5), 1, len(names), facecolor="none", edgecolor=NEUTRAL,
                               linewidth=3.5, zorder=5))  # above the white cell borders
    who = "chosen by the user" if selection.get("overridden") else "recommended"
    ax.set_xticks(range(len(counts)), [f"{c}\n{who}" if i == chosen else str(c) for i, c in enumerate(counts)])
    ax.xaxis.tick_top()
    ax.set_xlabel("subtype count")
    ax.xaxis.set_label_position("top")
    hints = {True: "higher is better", False: "lower is better", None: "no direction"}
    ax.set_yticks(range(len(names)), [plot_text(f"{words(n)}\n({hints[directions.get(n)]})") for n in names],
                  fontsize=11)
    ax.tick_params(length=0)
    ax.spines[:].set_visible(False)
    cell_borders(ax, len(names), len(counts))
    note = "shade: worst (light) to best (dark) of the counts tried; value in each cell"
    if _too_small(run, counts).any():
        note += "; hatched: a subtype below the minimum size"
    ax.set_title(note, fontsize=11, color=NEUTRAL, loc="left", y=-0.08, va="top")
