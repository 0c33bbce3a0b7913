"""Per-modality figures: each layer's own map of the patients with how well it keeps each subtype apart,
and what each factor of the joint model took from each layer (shares and top loadings)."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure, SubFigure
from matplotlib.patches import Patch

from strataweave.report.figure_style import cell_borders, panel_grid
from strataweave.report.figures_cohort import modality_names
from strataweave.report.formatting import plot_text, shorten
from strataweave.report.palette import NEUTRAL, NEUTRAL_SHADES, SEQUENTIAL, subtype_colour
from strataweave.report.run_folder import RunView

Canvas = Figure | SubFigure
MAP_COLUMNS = 3
LOADING_COLUMNS = 4
DARK_TEXT_ABOVE = 0.6
MIN_MAP_PATIENTS = 3  # as the workflow: a layer with fewer grouped patients has no map


def mapped_modalities(run: RunView) -> list[int]:
    """Positions of the modalities that have a map."""
    return [m for m in range(len(modality_names(run))) if f"modality_{m}_map" in run.arrays]


def map_notes(run: RunView) -> list[str]:
    """One line per modality left out of the maps, saying why (none for a run folder drawn without maps)."""
    if "modality_separation" not in run.arrays:
        return []
    mapped = set(mapped_modalities(run))
    return [f"{row['name']}: no map, {row['patients']} patients measured (a map needs at least {MIN_MAP_PATIENTS} "
            "and two features)" for m, row in enumerate(run.results["cohort"]["modalities"]) if m not in mapped]


def _draw_map(run: RunView, ax, m: int) -> None:
    points, codes = run.arrays[f"modality_{m}_map"], run.arrays[f"modality_{m}_map_codes"]
    variance = run.arrays[f"modality_{m}_map_variance"]
    for code in np.unique(codes):
        ax.scatter(*points[codes == code].T, s=16, color=subtype_colour(code), edgecolors="white", linewidths=0.3)
    ax.set_xlabel(f"component 1 ({100 * variance[0]:.0f}% of variance)", fontsize=11)
    ax.set_ylabel(f"component 2 ({100 * variance[1]:.0f}%)", fontsize=11)
    ax.tick_params(labelsize=9)
    ax.set_title(f"{shorten(plot_text(modality_names(run)[m]), 24)} (n = {codes.size})", fontsize=13, loc="left")


def _draw_separation(run: RunView, ax) -> None:
    """Modalities (rows) x subtypes (columns): mean silhouette, shaded from 0 (mixed) to 1 (apart)."""
    values = run.arrays["modality_separation"]
    ax.imshow(np.clip(np.nan_to_num(values, nan=0.0), 0, 1), cmap=SEQUENTIAL, vmin=0, vmax=1, aspect="auto")
    for (row, column), value in np.ndenumerate(values):
        ax.text(column, row, "\u2013" if np.isnan(value) else f"{value:.2f}", ha="center", va="center", fontsize=10,
                color="white" if value > DARK_TEXT_ABOVE else NEUTRAL)
    ax.set_xticks(range(values.shape[1]), [shorten(plot_text(label), 8) for label in run.labels], fontsize=10)
    ax.set_yticks(range(values.shape[0]), [shorten(plot_text(name), 14) for name in modality_names(run)], fontsize=10)
    ax.tick_params(length=0)
    ax.spines[:].set_visible(False)
    cell_borders(ax, *values.shape)
    ax.set_title("Separation (silhouette)", fontsize=13, loc="left")


def draw_modality_maps(run: RunView, fig: Canvas) -> None:
    """One principal-component map per modality, coloured by subtype, and the separation table beside them."""
    mapped = mapped_modalities(run)
    axes = panel_grid(fig, len(mapped) + 1, MAP_COLUMNS)
    for ax, m in zip(axes, mapped):
        _draw_map(run, ax, m)
    _draw_separation(run, axes[-1])
    handles = [Patch(color=subtype_colour(code), label=plot_text(label)) for code, label in enumerate(run.labels)]
    fig.legend(handles=handles, loc="outside lower center", ncols=min(len(handles), 8), frameon=False)
    fig.suptitle("Each omics layer on its own: which subtypes it keeps apart")


def factor_names(run: RunView) -> list[str]:
    """'factor j (highest in S3)': each factor named by the subtype whose patients score highest on it."""
    means = run.arrays["factor_subtype_mean"]
    return [f"factor {j + 1} (highest in {plot_text(run.labels[code])})"
            for j, code in enumerate(np.argmax(means, axis=0))]


def draw_factor_contributions(run: RunView, fig: Canvas) -> None:
    """Modalities (rows) x factors (columns): the share of each factor's loading each modality holds."""
    shares = run.arrays["factor_contribution"]
    ax = fig.subplots()
    ax.imshow(shares, cmap=SEQUENTIAL, vmin=0, vmax=max(float(shares.max()), 1e-12), aspect="auto")
    scale = max(float(shares.max()), 1e-12)
    for (row, column), value in np.ndenumerate(shares):
        ax.text(column, row, f"{100 * value:.0f}%", ha="center", va="center", fontsize=12,
                color="white" if value / scale > DARK_TEXT_ABOVE else NEUTRAL)
    ax.set_xticks(range(shares.shape[1]), [name.replace(" (", "\n(") for name in factor_names(run)], fontsize=11)
    ax.set_yticks(range(shares.shape[0]), [shorten(plot_text(name), 20) for name in modality_names(run)])
    ax.xaxis.tick_top()
    ax.tick_params(length=0)
    ax.spines[:].set_visible(False)
    cell_borders(ax, *shares.shape)
    fig.suptitle("Share of each factor's loading held by each layer (columns add to 100%)")


def draw_factor_loadings(run: RunView, fig: Canvas) -> None:
    """Per factor, its top features across the layers, as their share of the factor's loading."""
    shares, features = run.arrays["factor_top_share"], run.arrays["factor_top_feature"]
    modality = run.arrays["factor_top_modality"]
    names, factors = modality_names(run), factor_names(run)
    winners = np.argmax(run.arrays["factor_subtype_mean"], axis=0)
    for j, ax in enumerate(panel_grid(fig, len(factors), LOADING_COLUMNS)):
        positions = np.arange(shares.shape[1])
        ax.barh(positions, 100 * shares[j], color=NEUTRAL_SHADES[2])
        for position, value, m in zip(positions, 100 * shares[j], modality[j]):
            ax.text(value, position, f" {shorten(plot_text(names[m]), 12)}", va="center", fontsize=8, color=NEUTRAL)
        ax.set_xlim(0, 1.45 * 100 * float(shares[j].max()))
        ax.set_yticks(positions, [shorten(plot_text(f), 16) for f in features[j]], fontsize=9)
        ax.invert_yaxis()
        ax.tick_params(axis="x", labelsize=9)
        ax.set_xlabel("% of the factor's loading", fontsize=10)
        ax.set_title(factors[j].replace(" (", "\n("), fontsize=11, loc="left", color=subtype_colour(winners[j]))
    if any(str(f).endswith((" +", " -")) for f in features.ravel()):
        fig.supxlabel("each bar names the feature's layer; '+' / '-': the part of a feature above / below its centre",
                      fontsize=11)
    fig.suptitle(f"Top {shares.shape[1]} loadings of each factor")
