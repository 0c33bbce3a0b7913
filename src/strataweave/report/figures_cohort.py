"""Cohort figures: who was measured in which modality, features kept by each filter, graph agreement."""

from __future__ import annotations

import numpy as np
from matplotlib.colors import ListedColormap
from matplotlib.figure import Figure, SubFigure
from matplotlib.patches import Patch

from strataweave.report.figure_style import plain_log_ticks
from strataweave.report.formatting import plot_text, shorten
from strataweave.report.palette import MARKERS, NEUTRAL, NEUTRAL_LIGHT, NEUTRAL_SHADES, SEQUENTIAL, subtype_colours
from strataweave.report.run_folder import RunView
from strataweave.report.wording import words

Canvas = Figure | SubFigure


def modality_names(run: RunView) -> list[str]:
    return [row["name"] for row in run.results["cohort"]["modalities"]]


def draw_presence(run: RunView, fig: Canvas) -> None:
    """Patient-by-modality presence: patients (columns) ordered by subtype, a subtype strip on top."""
    codes = run.arrays["subtype_code"]
    presence = run.arrays["presence"]
    order = np.lexsort(np.vstack([(~presence).T[::-1], codes[None, :]]))
    names = [shorten(plot_text(name), 24) for name in modality_names(run)]
    strip_ax, ax = fig.subplots(2, 1, sharex=True, height_ratios=[1, max(len(names), 1) * 1.6])
    colours = ListedColormap(subtype_colours(run.results["subtype_count"]))
    strip_ax.imshow(codes[order][None, :], aspect="auto", cmap=colours, vmin=-0.5,
                    vmax=run.results["subtype_count"] - 0.5, interpolation="nearest")
    strip_ax.set_yticks([0], ["subtype"])
    strip_ax.tick_params(bottom=False)
    ax.imshow(presence[order].T.astype(float), aspect="auto", cmap=ListedColormap([NEUTRAL_LIGHT, NEUTRAL]),
              vmin=0, vmax=1, interpolation="nearest")
    ax.set_yticks(range(len(names)), names)
    ax.set_xlabel(f"patients, ordered by subtype (n = {presence.shape[0]})")
    ax.set_xticks([])
    handles = [Patch(color=NEUTRAL, label="measured"), Patch(color=NEUTRAL_LIGHT, label="missing")]
    handles += [Patch(color=c, label=plot_text(label)) for c, label in zip(subtype_colours(len(run.labels)), run.labels)]
    fig.legend(handles=handles, loc="outside right center", frameon=False)
    fig.suptitle("Which patients were measured in which modality")


def draw_filters(run: RunView, fig: Canvas) -> None:
    """Features kept after each filter step, one grey line per modality (log scale)."""
    ax = fig.subplots()
    for i, row in enumerate(run.results["cohort"]["modalities"]):
        steps = ["in file"] + [words(step["step"]) for step in row["filters"]]
        kept = [row["features_in_file"]] + [step["features_after"] for step in row["filters"]]
        ax.plot(range(len(steps)), kept, marker=MARKERS[i % len(MARKERS)], color=NEUTRAL_SHADES[i % len(NEUTRAL_SHADES)],
                linewidth=2, markersize=9, label=shorten(plot_text(row["name"]), 24))
        ax.set_xticks(range(len(steps)), [plot_text(s) for s in steps])
    ax.set_yscale("log")
    plain_log_ticks(ax.yaxis, "25")
    ax.set_xlabel("filter step (applied in this order)")
    ax.set_ylabel("features kept (count, log scale)")
    ax.legend(frameon=False)
    fig.suptitle("Features kept after each filter, per modality")


def draw_agreement(run: RunView, fig: Canvas) -> None:
    """Neighbour-set overlap between each pair of modalities as a symmetric heatmap."""
    names = modality_names(run)
    index = {name: i for i, name in enumerate(names)}
    matrix = np.full((len(names), len(names)), np.nan)
    np.fill_diagonal(matrix, 1.0)
    for row in run.results["graph"]["agreement"]:
        a, b = index.get(row["modality_a"]), index.get(row["modality_b"])
        if a is not None and b is not None:
            matrix[a, b] = matrix[b, a] = row["overlap"]
    ax = fig.subplots()
    image = ax.imshow(matrix, cmap=SEQUENTIAL, vmin=0, vmax=1)
    labels = [shorten(plot_text(name), 20) for name in names]
    ax.set_xticks(range(len(names)), labels, rotation=30, ha="right")
    ax.set_yticks(range(len(names)), labels)
    for (i, j), value in np.ndenumerate(matrix):
        if i != j and not np.isnan(value):
            ax.text(j, i, f"{value:.2f}", ha="center", va="center", color="white" if value > 0.5 else "black")
    ax.spines[:].set_visible(False)
    fig.colorbar(image, ax=ax, label="shared neighbours (fraction, 0-1)")
    fig.suptitle("Agreement between modality graphs")
