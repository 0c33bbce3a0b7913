"""Labelled flows between columns of patient groups: stacked nodes joined by bands as wide as the patients they carry.

One drawing for every flow the program shows (subtypes from one count to the next, the subtypes of
two runs), so they read the same way: each node names its group and its size, each band of any
weight says how many patients it carries.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from matplotlib.axes import Axes
from matplotlib.patches import PathPatch, Rectangle
from matplotlib.path import Path as CurvePath

from strataweave.report.palette import NEUTRAL

BAND_LABEL_SHARE = 0.04  # bands carrying at least this share of the patients are numbered
NODE_WIDTH = 0.12
GAP_SHARE = 0.02  # space between two nodes of a column, as a share of the patients


@dataclass(frozen=True)
class FlowColumn:
    """One column of nodes: patients per group, the text beside each node and its colour.

    `side` puts the texts right or left of the nodes; `emphasis` writes them bold and larger.
    """

    sizes: np.ndarray
    texts: list[str]
    colours: list[str]
    side: str = "right"
    emphasis: bool = False


@dataclass(frozen=True)
class FlowBand:
    """Patients going from node `source` of column `column` to node `target` of the next column."""

    column: int
    source: int
    target: int
    patients: int
    colour: str


def _band(x0: float, y0: tuple[float, float], x1: float, y1: tuple[float, float]) -> CurvePath:
    """A smooth band from the vertical segment y0 at x0 to the segment y1 at x1."""
    mid = (x0 + x1) / 2
    vertices = [
        (x0, y0[0]), (mid, y0[0]), (mid, y1[0]), (x1, y1[0]),
        (x1, y1[1]), (mid, y1[1]), (mid, y0[1]), (x0, y0[1]), (x0, y0[0]),
    ]
    codes = [CurvePath.MOVETO] + [CurvePath.CURVE4] * 3 + [CurvePath.LINETO] + [CurvePath.CURVE4] * 3 + [CurvePath.CLOSEPOLY]
    return CurvePath(vertices, codes)


def _node_tops(sizes: np.ndarray, gap: float) -> np.ndarray:
    """Top of each stacked node: the sizes above it plus one gap per node above."""
    sizes = np.asarray(sizes, dtype=float)
    return np.concatenate([[0.0], np.cumsum(sizes + gap)[:-1]])


def _draw_nodes(ax: Axes, x: int, column: FlowColumn, tops: np.ndarray) -> None:
    for top, size, text, colour in zip(tops, column.sizes, column.texts, column.colours):
        ax.add_patch(Rectangle((x - NODE_WIDTH / 2, top), NODE_WIDTH, size, color=colour, linewidth=0))
        right = column.side == "right"
        ax.text(x + (1 if right else -1) * (NODE_WIDTH / 2 + 0.02), top + size / 2, text, va="center",
                ha="left" if right else "right", fontsize=11 if column.emphasis else 9,
                fontweight="bold" if column.emphasis else "normal", color=NEUTRAL)


def draw_flow(ax: Axes, columns: list[FlowColumn], bands: list[FlowBand], names: list[str]) -> None:
    """Columns of stacked nodes at x = 0, 1, ... (ticks `names`) with the bands between neighbouring columns.

    Bands leave and enter each node in the order of their (source, target), so they never cross inside a node;
    a band's number stands where it enters its target, where bands are stacked and never cross.
    """
    total = max((float(np.sum(c.sizes)) for c in columns), default=1.0) or 1.0
    gap = GAP_SHARE * total
    tops = [_node_tops(column.sizes, gap) for column in columns]
    for x, (column, column_tops) in enumerate(zip(columns, tops)):
        _draw_nodes(ax, x, column, column_tops)
    out_used = [np.zeros(len(c.sizes)) for c in columns]
    in_used = [np.zeros(len(c.sizes)) for c in columns]
    for band in sorted(bands, key=lambda b: (b.column, b.source, b.target)):
        x, after = band.column, band.column + 1
        y0 = tops[x][band.source] + out_used[x][band.source]
        y1 = tops[after][band.target] + in_used[after][band.target]
        out_used[x][band.source] += band.patients
        in_used[after][band.target] += band.patients
        ax.add_patch(PathPatch(_band(x + NODE_WIDTH / 2, (y0, y0 + band.patients), after - NODE_WIDTH / 2,
                                     (y1, y1 + band.patients)), facecolor=band.colour, alpha=0.45, linewidth=0))
        if band.patients >= BAND_LABEL_SHARE * total:
            ax.text(after - NODE_WIDTH / 2 - 0.02, y1 + band.patients / 2, str(band.patients), ha="right", va="center",
                    fontsize=9, color=NEUTRAL, bbox={"boxstyle": "round,pad=0.15", "facecolor": "white",
                                                     "edgecolor": "none", "alpha": 0.8})
    ax.set_xlim(-0.5, len(columns) - 0.5)
    ax.set_ylim(total + gap * max((len(c.sizes) for c in columns), default=1), -gap)
    ax.set_xticks(range(len(columns)), names)
    ax.spines[["left"]].set_visible(False)
    ax.set_yticks([])
