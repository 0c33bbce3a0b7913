"""Benjamini-Hochberg false discovery rate adjustment (Benjamini & Hochberg 1995)."""

from __future__ import annotations

import numpy as np


def bh_adjust(p_values) -> np.ndarray:
    """Benjamini-Hochberg adjusted p-values; NaN entries stay NaN and do not count as tests.

    Works along the last axis, so a matrix of p-values is adjusted row by row.
    """
    p = np.asarray(p_values, dtype=float)
    if p.ndim == 0:
        return bh_adjust(p[None])[0]
    if p.ndim > 1:
        return np.apply_along_axis(bh_adjust, -1, p)
    adjusted = np.full(p.shape, np.nan)
    tested = np.flatnonzero(~np.isnan(p))
    if tested.size == 0:
        return adjusted
    order = tested[np.argsort(p[tested], kind="mergesort")]
    m = order.size
    scaled = p[order] * m / np.arange(1, m + 1)
    monotone = np.minimum.accumulate(scaled[::-1])[::-1]
    adjusted[order] = np.minimum(monotone, 1.0)
    return adjusted
