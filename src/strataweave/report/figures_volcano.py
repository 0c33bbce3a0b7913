"""Volcano-style marker plots: every feature's difference of means against its p, one panel per subtype.

Drawn beside each modality's marker heatmap: the heatmap shows the top markers, the volcano where
they stand among all the features tested, including a layer or a grouping with no marker at all.
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure, SubFigure

from strataweave.report.figure_style import panel_grid
from strataweave.report.formatting import plot_text, shorten
from strataweave.report.palette import NEUTRAL, NEUTRAL_LIGHT, subtype_colour
from strataweave.report.run_folder import RunView

Canvas = Figure | SubFigure
COLUMNS = 4
NAMED_PER_PANEL = 3
SMALLEST_P = 1e-300


def volcano_blocks(run: RunView) -> list[int]:
    """Positions of the marker blocks that carry every feature's test."""
    return [i for i in range(len(run.results.get("markers") or [])) if f"volcano_{i}_p" in run.arrays]


def tested_subtypes(run: RunView, index: int) -> np.ndarray:
    """Subtype codes with at least one feature tested in block `index` (a panel each)."""
    return np.flatnonzero(np.isfinite(run.arrays[f"volcano_{index}_p"]).any(axis=1))


def _draw_panel(run: RunView, ax, index: int, code: int) -> None:
    difference = run.arrays[f"volcano_{index}_difference"][code]
    strength = -np.log10(np.clip(run.arrays[f"volcano_{index}_p"][code], SMALLEST_P, 1.0))
    significant = run.arrays[f"volcano_{index}_significant"][code]
    features = run.arrays[f"volcano_{index}_features"]
    tested = np.isfinite(difference) & np.isfinite(strength)
    quiet, marked = tested & ~significant, tested & significant
    ax.scatter(difference[quiet], strength[quiet], s=9, color=NEUTRAL_LIGHT, linewidths=0)
    ax.scatter(difference[marked], strength[marked], s=14, color=subtype_colour(code), linewidths=0)
    higher = np.flatnonzero(marked & (difference > 0))
    named = higher[np.argsort(-strength[higher], kind="stable")][:NAMED_PER_PANEL]
    if named.size:  # ringed on the plot and listed in the corner, so names never sit on each other
        ax.scatter(difference[named], strength[named], s=40, facecolors="none", edgecolors=NEUTRAL, linewidths=1)
        ax.text(0.03, 0.97, "top:\n" + "\n".join(shorten(plot_text(features[f]), 16) for f in named),
                transform=ax.transAxes, va="top", fontsize=8, color=NEUTRAL,
                bbox={"boxstyle": "round,pad=0.2", "facecolor": "white", "edgecolor": "none", "alpha": 0.85})
    ax.axvline(0, color=NEUTRAL_LIGHT, linewidth=0.8, zorder=0)
    ax.tick_params(labelsize=9)
    up = int(np.count_nonzero(marked & (difference > 0)))
    ax.set_title(f"{shorten(plot_text(run.labels[code]), 14)}: {up} higher, "
                 f"{int(np.count_nonzero(marked)) - up} lower", fontsize=11, loc="left", color=subtype_colour(code))


def draw_volcano(run: RunView, fig: Canvas, index: int) -> None:
    """One panel per tested subtype of marker block `index`; an untested subtype is named in a note, not drawn."""
    codes = tested_subtypes(run, index)
    for ax, code in zip(panel_grid(fig, len(codes), COLUMNS, sharey=True), codes):
        _draw_panel(run, ax, index, int(code))
    fig.supxlabel("difference of means, subtype minus the rest (normalised scale)", fontsize=12)
    fig.supylabel("-log10 p", fontsize=12)
    untested = [plot_text(label) for code, label in enumerate(run.labels) if code not in set(codes.tolist())]
    note = f" (not tested: {', '.join(untested)})" if untested else ""
    modality = run.results["markers"][index]["modality"]
    fig.suptitle(f"Every feature of {shorten(plot_text(modality), 30)}, each subtype against the rest; "
                 f"coloured: adjusted p below the threshold{note}", fontsize=13)
