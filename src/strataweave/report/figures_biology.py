"""Biology figures: marker heatmaps per modality and the gene-set enrichment dot plot."""

from __future__ import annotations

import math

import numpy as np
from matplotlib.colors import ListedColormap
from matplotlib.figure import Figure, SubFigure
from matplotlib.lines import Line2D

from strataweave.report.formatting import plot_text, shorten
from strataweave.report.palette import DIVERGING, NEUTRAL, SEQUENTIAL, subtype_colours
from strataweave.report.run_folder import RunView

Canvas = Figure | SubFigure
MAX_LABELLED_FEATURES = 45
SETS_PER_SUBTYPE = 6
HEATMAP_LIMIT = 3.0
COMPACT_INCHES = 8.0  # narrower canvases (a slide's panels) leave out feature names and the legend


def _boundaries(codes: np.ndarray) -> np.ndarray:
    """Positions between runs of equal codes (where a white separator is drawn)."""
    return np.flatnonzero(np.diff(codes)) + 0.5


def draw_marker_heatmap(run: RunView, fig: Canvas, index: int) -> None:
    """Top markers (rows) x patients ordered by subtype (columns) of modality `index`."""
    values = run.arrays[f"markers_{index}_values"]
    features = run.arrays[f"markers_{index}_features"]
    feature_code = run.arrays[f"markers_{index}_feature_code"]
    patient_code = run.arrays[f"markers_{index}_patient_code"]
    count = run.results["subtype_count"]
    colours = ListedColormap(subtype_colours(count))
    grid = fig.add_gridspec(2, 2, width_ratios=[0.025, 1], height_ratios=[0.05, 1], wspace=0.01, hspace=0.01)
    top = fig.add_subplot(grid[0, 1])
    left = fig.add_subplot(grid[1, 0])
    ax = fig.add_subplot(grid[1, 1], sharex=top, sharey=left)
    strip = {"cmap": colours, "vmin": -0.5, "vmax": count - 0.5, "aspect": "auto", "interpolation": "nearest"}
    top.imshow(patient_code[None, :], **strip)
    left.imshow(feature_code[:, None], **strip)
    image = ax.imshow(np.clip(values, -HEATMAP_LIMIT, HEATMAP_LIMIT), cmap=DIVERGING, vmin=-HEATMAP_LIMIT,
                      vmax=HEATMAP_LIMIT, aspect="auto", interpolation="nearest")
    for x in _boundaries(patient_code):
        ax.axvline(x, color="white", linewidth=1.5)
    for y in _boundaries(feature_code):
        ax.axhline(y, color="white", linewidth=1.5)
    for axis in (top, left):
        axis.set_xticks([])
        axis.set_yticks([])
        axis.spines[:].set_visible(False)
    ax.tick_params(left=False, labelleft=False, bottom=False, labelbottom=False)
    compact = fig.bbox.width / fig.dpi < COMPACT_INCHES
    if len(features) <= MAX_LABELLED_FEATURES and not compact:
        ax.yaxis.tick_right()
        ax.set_yticks(range(len(features)), [shorten(plot_text(f), 28) for f in features],
                      fontsize=max(7, 12 - len(features) // 10))
        ax.tick_params(right=False, labelright=True)
        left.tick_params(left=False, labelleft=False)
    ax.set_xlabel(f"{len(patient_code)} patients, ordered by subtype" if compact else
                  f"patients measured in this modality, ordered by subtype (n = {len(patient_code)})")
    fig.colorbar(image, ax=ax, location="bottom", shrink=0.4, pad=0.02,
                 label="SD units" if compact else "value on the normalised scale, centred and scaled per feature (SD units)")
    if compact:
        for code in np.unique(patient_code):
            columns = np.flatnonzero(patient_code == code)
            top.text(columns.mean(), -0.6, shorten(plot_text(run.labels[code]), 10), ha="center", va="bottom",
                     fontsize=10)
    else:
        handles = [Line2D([], [], color=c, linewidth=8, label=plot_text(label))
                   for c, label in zip(subtype_colours(count), run.labels)]
        fig.legend(handles=handles, loc="outside right upper", frameon=False)
    modality = run.results["markers"][index]["modality"]
    fig.suptitle(shorten(plot_text(modality), 30) if compact else
                 f"Top markers per subtype: {shorten(plot_text(modality), 30)}")


def enrichment_rows(run: RunView) -> list[dict]:
    """The rows shown in the dot plot: the SETS_PER_SUBTYPE smallest adjusted p of each subtype."""
    shown = []
    for label in run.labels:
        rows = [r for r in run.results["enrichment"] if r["subtype"] == label and r["p_adjusted"] is not None]
        shown += sorted(rows, key=lambda r: r["p_adjusted"])[:SETS_PER_SUBTYPE]
    return shown


def draw_enrichment(run: RunView, fig: Canvas) -> None:
    """Dot plot: gene sets (rows) x subtypes (columns); dot area = overlap, colour = -log10 adjusted p."""
    rows = enrichment_rows(run)
    ax = fig.subplots()
    sets = list(dict.fromkeys(r["gene_set"] for r in rows))
    column = {label: i for i, label in enumerate(run.labels)}
    x = [column[r["subtype"]] for r in rows]
    y = [sets.index(r["gene_set"]) for r in rows]
    strength = [-math.log10(max(r["p_adjusted"], 1e-300)) for r in rows]
    largest = max((r["overlap"] for r in rows), default=1) or 1
    dots = ax.scatter(x, y, s=[40 + 360 * r["overlap"] / largest for r in rows], c=strength, cmap=SEQUENTIAL,
                      vmin=0, edgecolors=NEUTRAL, linewidths=0.6)
    ax.set_xticks(range(len(run.labels)), [shorten(plot_text(label), 14) for label in run.labels])
    ax.set_yticks(range(len(sets)), [shorten(plot_text(name), 40) for name in sets],
                  fontsize=max(8, 12 - len(sets) // 8))
    ax.set_xlim(-0.6, len(run.labels) - 0.4)
    ax.set_ylim(len(sets) - 0.5, -0.5)
    ax.set_xlabel("subtype")
    ax.grid(color="#EEEEEE", linewidth=0.8)
    ax.set_axisbelow(True)
    fig.colorbar(dots, ax=ax, label="-log10 adjusted p (BH)", shrink=0.7)
    overlaps = sorted({r["overlap"] for r in rows})
    shown = sorted({overlaps[0], overlaps[len(overlaps) // 2], overlaps[-1]})
    handles = [Line2D([], [], marker="o", linestyle="", markerfacecolor="white", markeredgecolor=NEUTRAL,
                      markersize=math.sqrt(40 + 360 * s / largest), label=f"{s} markers in the set") for s in shown]
    fig.legend(handles=handles, loc="outside lower center", ncols=len(handles), frameon=False)
    fig.suptitle(f"Over-represented gene sets (up to {SETS_PER_SUBTYPE} per subtype)")
