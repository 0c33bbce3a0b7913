"""How numbers and user text are written in figures, tables and slides."""

from __future__ import annotations

import math
from numbers import Integral, Real
from typing import Any


def format_p(value: Any) -> str:
    """A p-value for people: 3 significant digits, scientific below 0.001, 'not tested' for null."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "not tested"
    if value < 1e-3:
        return f"{value:.2e}"
    return f"{value:.3g}"


def format_value(value: Any) -> str:
    """Any table cell as text: integers as is, floats to 3 significant digits, null as an en dash."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "\u2013"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, Integral):
        return str(value)
    if isinstance(value, Real):
        return f"{value:.3g}" if abs(value) >= 1e-3 or value == 0 else f"{value:.2e}"
    if isinstance(value, (list, tuple)):
        return ", ".join(format_value(item) for item in value)
    return str(value)


def plot_text(text: Any) -> str:
    """User text made literal for matplotlib, which would otherwise read '$...$' as mathematics."""
    return str(text).replace("$", r"\$")


def shorten(text: str, width: int = 40) -> str:
    """Text cut to `width` characters with an ellipsis, for axis labels."""
    return text if len(text) <= width else text[: width - 1] + "\u2026"
