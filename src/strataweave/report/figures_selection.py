"""How-many-subtypes figures: criteria against the count, consensus matrices, splits from k to k+1.

Only the final subtypes get subtype colours; the subtypes of other counts are drawn in
alternating greys so no colour is ever shared by two different groups of patients.
"""

from __future__ import annotations

import numpy as np
from matplotlib.cm import ScalarMappable
from matplotlib.colors import to_rgba
from matplotlib.figure import Figure, SubFigure
from matplotlib.patches import PathPatch, Rectangle
from matplotlib.path import Path as CurvePath

from strataweave.report.formatting import plot_text
from strataweave.report.palette import NEUTRAL, NEUTRAL_SHADES, SEQUENTIAL, subtype_colour
from strataweave.report.run_folder import RunView
from strataweave.report.wording import words

Canvas = Figure | SubFigure

CRITERION_UNITS = {
    "pac": "PAC (fraction of ambiguous pairs)",
    "cophenetic": "cophenetic correlation",
    "silhouette": "mean silhouette (-1 to 1)",
    "eigengap": "eigengap of the fused graph",
    "reconstruction_error": "reconstruction error (relative)",
    "smallest_size": "smallest subtype (patients)",
    "smallest_subtype": "smallest subtype (patients)",
    "stability": "stability (mean ARI)",
    "modularity": "modularity on the fused graph",
}


def group_colour(run: RunView, count: int, code: int) -> str:
    """Subtype colour at the final count; alternating greys at every other count."""
    if count == run.results["subtype_count"]:
        return subtype_colour(code)
    return NEUTRAL_SHADES[1] if code % 2 else NEUTRAL_SHADES[2]


def grid_shape(n: int, max_columns: int = 4) -> tuple[int, int]:
    columns = min(n, max_columns)
    return -(-n // columns), columns


def draw_criteria(run: RunView, fig: Canvas) -> None:
    """One small panel per criterion against the count, the chosen count marked by a dashed line."""
    selection = run.results["selection"]
    counts = selection["counts"]
    directions = selection.get("higher_is_better", {})
    criteria = list(selection["criteria"].items())
    rows, columns = grid_shape(len(criteria))
    axes = np.atleast_1d(fig.subplots(rows, columns, sharex=True, squeeze=False)).ravel()
    for ax, (name, values) in zip(axes, criteria):
        y = np.array([np.nan if v is None else v for v in values], dtype=float)
        ax.plot(counts, y, color=NEUTRAL, marker="o", linewidth=2, markersize=8)
        ax.axvline(run.results["subtype_count"], color=NEUTRAL, linestyle="--", linewidth=1.2)
        hint = {True: " \u2191 better", False: " \u2193 better"}.get(directions.get(name), "")
        ax.set_title(plot_text(words(name)) + hint, fontsize=13)
        ax.set_ylabel(plot_text(CRITERION_UNITS.get(name, words(name))), fontsize=11)
        ax.set_xticks(counts)
        ax.tick_params(labelbottom=True)
    for ax in axes[len(criteria):]:
        ax.set_visible(False)
    for ax in axes[-columns:]:
        ax.set_xlabel("subtype count")
    chosen = "recommended" if not selection.get("overridden") else "chosen by the user"
    fig.suptitle(f"Criteria against the subtype count (dashed: {run.results['subtype_count']}, {chosen})")


def _consensus_image(run: RunView, count: int) -> np.ndarray:
    """Consensus matrix as RGBA with subtype strips on the top and left edges."""
    matrix = run.arrays[f"consensus_k{count}"].astype(float)
    codes = run.arrays[f"consensus_k{count}_codes"]
    size = matrix.shape[0]
    pad = max(2, size // 25)
    gap = max(1, size // 100)
    strip = np.array([to_rgba(group_colour(run, count, code)) for code in codes])
    image = np.ones((size + pad + gap, size + pad + gap, 4))
    image[pad + gap:, pad + gap:] = SEQUENTIAL(np.clip(matrix, 0, 1))
    image[:pad, pad + gap:] = strip[None, :, :]
    image[pad + gap:, :pad] = strip[:, None, :]
    return image


def draw_consensus(run: RunView, fig: Canvas) -> None:
    """Consensus matrix of each count tried, patients ordered by subtype at that count."""
    counts = run.results["selection"]["counts"]
    rows, columns = grid_shape(len(counts))
    axes = np.atleast_1d(fig.subplots(rows, columns, squeeze=False)).ravel()
    for ax, count in zip(axes, counts):
        ax.imshow(_consensus_image(run, count), interpolation="nearest")
        marker = " (used)" if count == run.results["subtype_count"] else ""
        ax.set_title(f"{count} subtypes{marker}", fontsize=13, fontweight="bold" if marker else "normal")
        ax.set_xticks([])
        ax.set_yticks([])
        ax.spines[:].set_visible(False)
    for ax in axes[len(counts):]:
        ax.set_visible(False)
    colourbar = fig.colorbar(ScalarMappable(cmap=SEQUENTIAL), ax=axes[: len(counts)].tolist(), shrink=0.8)
    colourbar.set_label("consensus (0-1)")
    fig.suptitle("Consensus matrices: how often two patients fell in one subtype (ordered by subtype)")


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
            if count == run.results["subtype_count"] and code < len(run.labels):
                ax.text(x + width / 2 + 0.02, y + size / 2, plot_text(run.labels[code]), va="center", fontsize=11)
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
    ax.set_xlim(-0.5, len(counts) - 0.5)
    ax.set_ylim(total + gap * max(counts), -gap)
    ax.set_xticks(range(len(counts)), [str(c) for c in counts])
    ax.set_xlabel("subtype count")
    ax.set_ylabel("patients (stacked)")
    ax.spines[["left"]].set_visible(False)
    ax.set_yticks([])
    fig.suptitle("How subtypes split from one count to the next")
