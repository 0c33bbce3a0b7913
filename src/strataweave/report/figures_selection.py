"""How-many-subtypes figures: the consensus of the resamples, and splits from count k to k+1.

Only the final subtypes get subtype colours; the subtypes of other counts are drawn in
alternating greys so no colour is ever shared by two different groups of patients.
"""

from __future__ import annotations

import numpy as np
from matplotlib.cm import ScalarMappable
from matplotlib.figure import Figure, SubFigure
from matplotlib.patches import PathPatch, Rectangle
from matplotlib.path import Path as CurvePath

from strataweave.report.formatting import format_value, plot_text
from strataweave.report.palette import NEUTRAL, NEUTRAL_SHADES, SEQUENTIAL, subtype_colour
from strataweave.report.run_folder import RunView

Canvas = Figure | SubFigure

BAND_LABEL_SHARE = 0.04  # bands carrying at least this share of the patients are numbered
DECISIVE_COLOURS = ("#E8CFA6", "#9B2A5C", "#3B0F2A")  # kept apart, ambiguous, kept together


def group_colour(run: RunView, count: int, code: int) -> str:
    """Subtype colour at the final count; alternating greys at every other count."""
    if count == run.results["subtype_count"]:
        return subtype_colour(code)
    return NEUTRAL_SHADES[1] if code % 2 else NEUTRAL_SHADES[2]


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


def _band(x0: float, y0: tuple[float, float], x1: float, y1: tuple[float, float]) -> CurvePath:
    """A smooth band from the vertical segment y0 at x0 to the segment y1 at x1."""
    mid = (x0 + x1) / 2
    vertices = [
        (x0, y0[0]), (mid, y0[0]), (mid, y1[0]), (x1, y1[0]),
        (x1, y1[1]), (mid, y1[1]), (mid, y0[1]), (x0, y0[1]), (x0, y0[0]),
    ]
    codes = [CurvePath.MOVETO] + [CurvePath.CURVE4] * 3 + [CurvePath.LINETO] + [CurvePath.CURVE4] * 3 + [CurvePath.CLOSEPOLY]
    return CurvePath(vertices, codes)


def _band_colour(run: RunView, source: tuple[int, int], target: tuple[int, int]) -> str:
    """A band takes the colour of the final subtype at either end, else a light grey."""
    for count, code in (target, source):
        if count == run.results["subtype_count"]:
            return subtype_colour(code)
    return NEUTRAL_SHADES[2]


def draw_split_flow(run: RunView, fig: Canvas) -> None:
    """How subtypes split and merge from each count to the next, as stacked nodes and bands."""
    selection = run.results["selection"]
    counts = list(selection["counts"])
    flow = selection.get("flow") or []
    sizes = _node_sizes(flow, counts)
    total = max((s.sum() for s in sizes.values()), default=1.0) or 1.0
    gap = 0.02 * total
    width = 0.12
    ax = fig.subplots()
    tops: dict[tuple[int, int], float] = {}
    for x, count in enumerate(counts):
        y = 0.0
        for code, size in enumerate(sizes[count]):
            tops[(count, code)] = y
            ax.add_patch(Rectangle((x - width / 2, y), width, size, color=group_colour(run, count, code), linewidth=0))
            final = count == run.results["subtype_count"] and code < len(run.labels)
            name = f"{plot_text(run.labels[code])} " if final else ""
            ax.text(x + width / 2 + 0.02, y + size / 2, f"{name}{int(size)}", va="center", fontsize=11 if final else 9,
                    fontweight="bold" if final else "normal", color=NEUTRAL)
            y += size + gap
    out_used = dict.fromkeys(tops, 0.0)
    in_used = dict.fromkeys(tops, 0.0)
    for x, count in enumerate(counts[:-1]):
        for row in sorted((r for r in flow if r["count"] == count), key=lambda r: (r["source"], r["target"])):
            source, target = (count, row["source"]), (counts[x + 1], row["target"])
            if source not in tops or target not in tops:
                continue
            y0 = tops[source] + out_used[source]
            y1 = tops[target] + in_used[target]
            out_used[source] += row["patients"]
            in_used[target] += row["patients"]
            colour = _band_colour(run, source, target)
            patch = PathPatch(_band(x + width / 2, (y0, y0 + row["patients"]), x + 1 - width / 2,
                                    (y1, y1 + row["patients"])), facecolor=colour, alpha=0.45, linewidth=0)
            ax.add_patch(patch)
            if row["patients"] >= BAND_LABEL_SHARE * total:
                ax.text(x + 0.5, (y0 + y1 + row["patients"]) / 2, str(row["patients"]), ha="center", va="center",
                        fontsize=9, color=NEUTRAL, bbox={"boxstyle": "round,pad=0.15", "facecolor": "white",
                                                         "edgecolor": "none", "alpha": 0.8})
    ax.set_xlim(-0.5, len(counts) - 0.5)
    ax.set_ylim(total + gap * max(counts), -gap)
    ax.set_xticks(range(len(counts)), [str(c) for c in counts])
    ax.set_xlabel("subtype count")
    ax.set_ylabel("patients (stacked)")
    ax.spines[["left"]].set_visible(False)
    ax.set_yticks([])
    fig.suptitle("How subtypes split from one count to the next")
