"""Benjamini-Hochberg false discovery rate adjustment (Benjamini & Hochberg 1995) by scipy."""

from __future__ import annotations

import numpy as np
from scipy.stats import false_discovery_control


def bh_adjust(p_values) -> np.ndarray:
    """Benjamini-Hochberg adjusted p-values along the last axis, so a matrix is adjusted row by row.

    NaN entries (nothing tested) stay NaN and do not count as tests; scipy refuses them.
    """
    p = np.asarray(p_values, dtype=float)
    if p.ndim == 0:
        return bh_adjust(p[None])[0]
    tested = ~np.isnan(p)
    if tested.all():
        return false_discovery_control(p, axis=-1)
    adjusted = np.full(p.shape, np.nan)
    for row in np.ndindex(p.shape[:-1]):
        if tested[row].any():
            adjusted[row][tested[row]] = false_discovery_control(p[row][tested[row]])
    return adjusted
