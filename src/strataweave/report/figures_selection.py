"""How-many-subtypes figures: the consensus of the resamples, and splits from count k to k+1.

Only the final subtypes get subtype colours; the subtypes of other counts are drawn in
alternating greys so no colour is ever shared by two different groups of patients.
"""

from __future__ import annotations

import numpy as np
from matplotlib.cm import ScalarMappable
from matplotlib.figure import Figure, SubFigure

from strataweave.report.flow_bands import FlowBand, FlowColumn, draw_flow
from strataweave.report.formatting import format_value, plot_text
from strataweave.report.palette import NEUTRAL, NEUTRAL_SHADES, SEQUENTIAL, alternating_grey, subtype_colour
from strataweave.report.run_folder import RunView

Canvas = Figure | SubFigure

DECISIVE_COLOURS = ("#E8CFA6", "#9B2A5C", "#3B0F2A")  # kept apart, ambiguous, kept together


def group_colour(run: RunView, count: int, code: int) -> str:
    """Subtype colour at the final count; alternating greys at every other count."""
    if count == run.results["subtype_count"]:
        return subtype_colour(code)
    return alternating_grey(code)


def _pair_shares(matrix: np.ndarray, window: tuple[float, float]) -> tuple[float, float, float]:
    """Shares of patient pairs (upper triangle, pairs drawn together at least once) below, inside and above
    the ambiguity window."""
    values = matrix[np.triu_indices_from(matrix, k=1)]
    values = values[~np.isnan(values)]
    if values.size == 0:
        return 0.0, 0.0, 0.0
    apart, together = np.mean(values < window[0]), np.mean(values > window[1])
    return float(apart), float(1.0 - apart - together), float(together)


def _window(run: RunView) -> tuple[float, float]:
    window = ((run.results.get("parameters") or {}).get("subtypes") or {}).get("pac_window") or [0.1, 0.9]
    return float(window[0]), float(window[1])


def _draw_chosen_matrix(run: RunView, ax) -> None:
    """The consensus matrix at the count used, each subtype's block named on the diagonal."""
    count = run.results["subtype_count"]
    matrix = run.arrays[f"consensus_k{count}"].astype(float)
    codes = run.arrays[f"consensus_k{count}_codes"]
    ax.imshow(np.clip(matrix, 0, 1), cmap=SEQUENTIAL, vmin=0, vmax=1, interpolation="nearest")
    for edge in np.flatnonzero(np.diff(codes)) + 0.5:
        ax.axvline(edge, color="white", linewidth=2)
        ax.axhline(edge, color="white", linewidth=2)
    for code in np.unique(codes):
        middle = np.flatnonzero(codes == code).mean()
        ax.text(middle, middle, plot_text(run.labels[code]) if code < len(run.labels) else str(code + 1),
                ha="center", va="center", fontsize=13, fontweight="bold", color="white",
                bbox={"boxstyle": "round,pad=0.25", "facecolor": subtype_colour(code), "edgecolor": "none"})
    ax.set_xticks([])
    ax.set_yticks([])
    ax.spines[:].set_visible(False)
    ax.set_title(f"{count} subtypes: how often two patients fell together", fontsize=13, loc="left")


def _draw_decisiveness(run: RunView, ax) -> None:
    """Per count, the shares of patient pairs the resamples keep apart, leave ambiguous or keep together."""
    selection = run.results["selection"]
    counts = list(selection["counts"])
    window = _window(run)
    shares = np.array([_pair_shares(run.arrays[f"consensus_k{k}"].astype(float), window) for k in counts])
    labels = (f"kept apart (< {window[0]:g})", f"ambiguous ({window[0]:g}-{window[1]:g})",
              f"kept together (> {window[1]:g})")
    left = np.zeros(len(counts))
    for part, (label, colour) in enumerate(zip(labels, DECISIVE_COLOURS)):
        ax.barh(range(len(counts)), shares[:, part], left=left, color=colour, label=label, height=0.7)
        left += shares[:, part]
    pac = selection["criteria"].get("pac") or [None] * len(counts)
    for row, value in enumerate(pac):
        if value is not None:
            ax.text(1.02, row, f"PAC {format_value(value)}", va="center", fontsize=11, color=NEUTRAL,
                    transform=ax.get_yaxis_transform())
    chosen = run.results["subtype_count"]
    ax.set_yticks(range(len(counts)), [f"{k} (used)" if k == chosen else str(k) for k in counts])
    ax.invert_yaxis()
    ax.set_xlim(0, 1)
    ax.set_xlabel("share of patient pairs")
    ax.set_ylabel("subtype count")
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.18), ncols=3, frameon=False, fontsize=10)
    ax.set_title("How decisively the resamples group each pair", fontsize=13, loc="left")


def draw_consensus(run: RunView, fig: Canvas) -> None:
    """The consensus matrix at the count used beside how decisive the pairs are at every count."""
    matrix_ax, bars_ax = fig.subplots(1, 2, width_ratios=[1, 1.25])
    _draw_chosen_matrix(run, matrix_ax)
    _draw_decisiveness(run, bars_ax)
    colourbar = fig.colorbar(ScalarMappable(cmap=SEQUENTIAL), ax=matrix_ax, location="bottom", shrink=0.7, pad=0.03)
    colourbar.set_label("consensus: share of resamples together")


def _node_sizes(flow: list[dict], counts: list[int]) -> dict[int, np.ndarray]:
    """Patients per subtype at each count, read off the flow rows (sources at k, targets at k+1)."""
    sizes: dict[int, np.ndarray] = {}
    for count in counts:
        outgoing = [(r["source"], r["patients"]) for r in flow if r["count"] == count]
        incoming = [(r["target"], r["patients"]) for r in flow if r["count"] == count - 1]
        pairs = outgoing or incoming
        totals = np.zeros(count)
        for code, patients in pairs:
            totals[code] += patients
        sizes[count] = totals
    return sizes


def _band_colour(run: RunView, source: tuple[int, int], target: tuple[int, int]) -> str:
    """A band takes the colour of the final subtype at either end, else a light grey."""
    for count, code in (target, source):
        if count == run.results["subtype_count"]:
            return subtype_colour(code)
    return NEUTRAL_SHADES[2]


def draw_split_flow(run: RunView, fig: Canvas) -> None:
    """How subtypes split and merge from each count to the next, as stacked nodes and bands."""
    counts = list(run.results["selection"]["counts"])
    flow = run.results["selection"].get("flow") or []
    sizes = _node_sizes(flow, counts)
    final = run.results["subtype_count"]
    columns = [FlowColumn(sizes[count], [f"{plot_text(run.labels[code])} {int(size)}"
                                         if count == final and code < len(run.labels) else str(int(size))
                                         for code, size in enumerate(sizes[count])],
                          [group_colour(run, count, code) for code in range(count)], emphasis=count == final)
               for count in counts]
    position = {count: x for x, count in enumerate(counts)}
    bands = [FlowBand(position[r["count"]], r["source"], r["target"], r["patients"],
                      _band_colour(run, (r["count"], r["source"]), (counts[position[r["count"]] + 1], r["target"])))
             for r in flow if r["count"] in position and position[r["count"]] + 1 < len(counts)]
    ax = fig.subplots()
    draw_flow(ax, columns, bands, [str(c) for c in counts])
    ax.set_xlabel("subtype count")
    ax.set_ylabel("patients (stacked)")
    fig.suptitle("How subtypes split from one count to the next")
