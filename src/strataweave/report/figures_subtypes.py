"""Subtype figures: sizes with core patients, the 2-D embedding, confidence, baseline agreement."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure, SubFigure
from matplotlib.lines import Line2D
from matplotlib.ticker import MaxNLocator

from strataweave.report.formatting import plot_text, shorten
from strataweave.report.palette import NEUTRAL, NEUTRAL_SHADES, subtype_colour
from strataweave.report.run_folder import RunView

Canvas = Figure | SubFigure


def draw_sizes(run: RunView, fig: Canvas) -> None:
    """Patients per subtype as horizontal bars, the core patients as the solid part (not for given groups)."""
    sizes = run.results["subtypes"]["sizes"]
    ax = fig.subplots()
    positions = np.arange(len(sizes))
    colours = [subtype_colour(code) for code in positions]
    if run.groups_given:
        ax.barh(positions, sizes, color=colours)
        fig.suptitle("Group sizes")
    else:
        codes, core = run.arrays["subtype_code"], run.arrays["core"]
        core_counts = np.bincount(codes[core], minlength=len(sizes))
        ax.barh(positions, sizes, color=colours, alpha=0.35, edgecolor=colours, linewidth=1.5)
        ax.barh(positions, core_counts, color=colours)
        ax.legend(handles=[Line2D([], [], color=NEUTRAL, linewidth=8, label="core patients"),
                           Line2D([], [], color=NEUTRAL, alpha=0.35, linewidth=8, label="all patients")],
                  frameon=False, loc="lower right")
        fig.suptitle("Subtype sizes (solid: core patients)")
    for position, size in zip(positions, sizes):
        ax.text(size, position, f" {size}", va="center")
    ax.set_yticks(positions, [shorten(plot_text(label), 20) for label in run.labels])
    ax.invert_yaxis()
    ax.set_xlabel("patients (count)")


def draw_embedding(run: RunView, fig: Canvas) -> None:
    """2-D spectral embedding of the fused graph; filled dots are core patients, rings the rest."""
    points, codes, core = run.arrays["embedding"], run.arrays["subtype_code"], run.arrays["core"]
    ax = fig.subplots()
    for code, label in enumerate(run.labels):
        colour = subtype_colour(code)
        member = codes == code
        ax.scatter(*points[member & core].T, s=36, color=colour, edgecolors="white", linewidths=0.4,
                   label=plot_text(label))
        ax.scatter(*points[member & ~core].T, s=36, facecolors="none", edgecolors=colour, linewidths=1.4)
    handles, _ = ax.get_legend_handles_labels()
    handles.append(Line2D([], [], marker="o", linestyle="", markerfacecolor="none", markeredgecolor=NEUTRAL,
                          markersize=7, label="not core (ring)"))
    ax.legend(handles=handles, frameon=False, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    ax.set_xlabel("spectral coordinate 1 (unitless)")
    ax.set_ylabel("spectral coordinate 2 (unitless)")
    ax.set_aspect("equal", adjustable="datalim")
    fig.suptitle("Fused-graph embedding by subtype")


def draw_confidence(run: RunView, fig: Canvas) -> None:
    """Distribution of assignment confidence per subtype, one histogram row per subtype."""
    codes, confidence = run.arrays["subtype_code"], run.arrays["confidence"]
    count = len(run.labels)
    axes = np.atleast_1d(fig.subplots(count, 1, sharex=True, squeeze=False)).ravel()
    bins = np.linspace(min(0.0, float(confidence.min())), max(float(confidence.max()), 1e-6), 21)
    for code, (ax, label) in enumerate(zip(axes, run.labels)):
        ax.hist(confidence[codes == code], bins=bins, color=subtype_colour(code), edgecolor="white")
        ax.set_ylabel(shorten(plot_text(label), 12), rotation=0, ha="right", va="center")
        ax.tick_params(labelsize=10)
        ax.yaxis.set_major_locator(MaxNLocator(nbins=3, integer=True))
    axes[-1].set_xlabel("assignment confidence (higher = clearer; bars count patients)")
    fig.suptitle("Confidence of the subtype assignment")


def draw_baselines(run: RunView, fig: Canvas) -> None:
    """Agreement (ARI and NMI) of each baseline method with the final subtypes."""
    rows = run.results["baselines"]
    ax = fig.subplots()
    positions = np.arange(len(rows))
    height = 0.38
    ax.barh(positions - height / 2, [r["ari"] for r in rows], height, color=NEUTRAL_SHADES[0], label="ARI")
    ax.barh(positions + height / 2, [r["nmi"] for r in rows], height, color=NEUTRAL_SHADES[2], label="NMI")
    ax.set_yticks(positions, [shorten(plot_text(r["method"]), 40) for r in rows])
    ax.invert_yaxis()
    ax.set_xlim(min(0.0, *(r["ari"] for r in rows)), 1.0)
    ax.set_xlabel("agreement with the final subtypes (ARI, NMI; 1 = identical)")
    ax.legend(frameon=False, loc="lower right")
    fig.suptitle("Baseline methods against the joint model's subtypes")
