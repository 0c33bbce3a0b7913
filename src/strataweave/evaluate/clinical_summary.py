"""Each clinical variable described by group, as a table people read: n (%) per level, or median [IQR].

Percentages are within a group, among its patients with a known value; patients with a missing
value are counted on a row of their own. The test and the adjusted p of the association table
stand on the first row of each variable.
"""

from __future__ import annotations

import pandas as pd

MISSING_LEVEL = "missing"


def _count_cells(values: pd.Series, labels: pd.Series, groups: list) -> list[dict]:
    known = values.notna()
    counts = pd.crosstab(labels[known], values[known].astype(str)).reindex(index=groups, fill_value=0)
    totals = counts.sum(axis=1).replace(0, 1)
    rows = [{"level": str(level), **{g: f"{counts.at[g, level]} ({100 * counts.at[g, level] / totals[g]:.0f}%)"
                                     for g in groups}} for level in counts.columns]
    return rows


def _median_cells(values: pd.Series, labels: pd.Series, groups: list) -> list[dict]:
    numbers = values.astype(float)
    cells = {}
    for g in groups:
        member = numbers[(labels == g).to_numpy()].dropna()
        cells[g] = (f"{member.median():.3g} [{member.quantile(0.25):.3g}\u2013{member.quantile(0.75):.3g}]"
                    if member.size else "\u2013")
    return [{"level": "median [IQR]", **cells}]


def _missing_cells(values: pd.Series, labels: pd.Series, groups: list) -> list[dict]:
    missing = values.isna().groupby(labels.to_numpy()).sum().reindex(groups, fill_value=0)
    if not missing.any():
        return []
    return [{"level": MISSING_LEVEL, **{g: str(int(missing[g])) for g in groups}}]


def describe_by_group(labels: pd.Series, table: pd.DataFrame, association: pd.DataFrame, groups: list) -> pd.DataFrame:
    """One row per level (categorical) or one median [IQR] row (continuous) per variable, a column
    per group, then the variable's test and adjusted p (on its first row only)."""
    rows = []
    for _, tested in association.iterrows():
        values = table[tested["variable"]]
        describe = _count_cells if tested["kind"] == "categorical" else _median_cells
        block = describe(values, labels, groups) + _missing_cells(values, labels, groups)
        for i, row in enumerate(block):
            first = i == 0
            rows.append({"variable": tested["variable"], **row,
                         "test": tested["test"] if first else "", "p_adjusted": tested["p_adjusted"] if first else None})
    return pd.DataFrame(rows, columns=["variable", "level", *groups, "test", "p_adjusted"])
