"""The shape every evaluation returns: tidy tables for people plus a plain dict for results.json."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd


@dataclass
class Evaluation:
    """Tidy DataFrames (``tables``) and a JSON-serialisable summary (``summary``)."""

    tables: dict[str, pd.DataFrame] = field(default_factory=dict)
    summary: dict[str, Any] = field(default_factory=dict)


def plain(value: Any) -> Any:
    """`value` made JSON-serialisable: numpy scalars to Python, NaN and infinity to None.

    DataFrames become lists of row dicts, Series and arrays become lists, mapping keys strings.
    """
    if isinstance(value, pd.DataFrame):
        return [plain(row) for row in value.to_dict(orient="records")]
    if isinstance(value, (pd.Series, pd.Index, np.ndarray)):
        return [plain(item) for item in np.asarray(value).tolist()]
    if isinstance(value, dict):
        return {str(key): plain(item) for key, item in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(item) for item in value]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    if value is None or isinstance(value, str):
        return value
    if pd.isna(value):
        return None
    return str(value)
