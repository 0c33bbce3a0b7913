"""The report's one colour scheme: a subtype keeps its colour in every figure and slide.

The eight subtype colours were chosen for this project by a greedy search that keeps every
pair far apart in CIELAB under normal vision and under simulated protanopia, deuteranopia
and tritanopia; the first k colours are the most distinct k. Series that are not subtypes
(modalities, criteria) are drawn in greys so they never borrow a subtype's colour.
"""

from __future__ import annotations

from matplotlib.colors import LinearSegmentedColormap

SUBTYPE_COLOURS: tuple[str, ...] = (
    "#2D5A87",  # harbour blue
    "#FF780F",  # signal orange
    "#A500FF",  # violet
    "#783C0F",  # chestnut
    "#00C3B4",  # teal
    "#B496FF",  # lavender
    "#D29669",  # tan
    "#5A4B4B",  # charcoal brown
)

#: Our accent (deep raspberry) and paper (warm sand): headings, findings and the chosen count, never a subtype.
ACCENT = "#9B2A5C"
PAPER = "#F4F1EA"
NEUTRAL = "#3C3C3C"
NEUTRAL_LIGHT = "#D9D9D9"
NEUTRAL_SHADES: tuple[str, ...] = ("#252525", "#636363", "#969696", "#4D4D4D", "#7F7F7F", "#AFAFAF")
MARKERS: tuple[str, ...] = ("o", "s", "^", "D", "v", "P", "X", "*")

#: Diverging map for centred values (blue below, orange above), safe for red-green deficiency.
DIVERGING = LinearSegmentedColormap.from_list("strataweave_diverging", ["#2D5A87", "#F7F7F7", "#FF780F"])
#: Sequential map for 0..1 values (consensus, agreement, evidence): warm paper through sand and raspberry to
#: deep plum; lightness falls steadily, so it reads the same in grey and under colour-vision deficiency.
SEQUENTIAL = LinearSegmentedColormap.from_list("strataweave_sequential",
                                               ["#FBF8F2", "#E8CFA6", "#C9787F", "#9B2A5C", "#3B0F2A"])


def subtype_colour(code: int) -> str:
    """Colour of the subtype with this code; beyond eight subtypes the colours repeat."""
    return SUBTYPE_COLOURS[int(code) % len(SUBTYPE_COLOURS)]


def subtype_colours(count: int) -> list[str]:
    """Colours of subtype codes 0..count-1."""
    return [subtype_colour(code) for code in range(count)]


def alternating_grey(code: int) -> str:
    """Grey of a group that is not one of the final subtypes: neighbours in a stack alternate two shades."""
    return NEUTRAL_SHADES[1] if code % 2 else NEUTRAL_SHADES[2]
