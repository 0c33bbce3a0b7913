"""Checks and alignment of a grouping (labels indexed by patient) with the tables it is tested on."""

from __future__ import annotations

import pandas as pd

from strataweave.errors import InputError


def group_order(labels: pd.Series) -> list:
    """The distinct labels in a stable order: natural order when comparable, else as text."""
    distinct = pd.unique(labels.dropna())
    try:
        return sorted(distinct)
    except TypeError:
        return sorted(distinct, key=str)


def check_grouping(grouping: pd.Series, name: str = "grouping") -> pd.Series:
    """`grouping` with patients without a label removed; raises InputError when it cannot be used."""
    if not isinstance(grouping, pd.Series):
        raise InputError(f"{name}: found {type(grouping).__name__}, expected a pandas Series of labels indexed by patient ID")
    duplicated = grouping.index[grouping.index.duplicated()]
    if len(duplicated):
        raise InputError(f"{name}: patient ID {duplicated[0]!r} appears more than once, expected one label per patient")
    labelled = grouping.dropna()
    if labelled.nunique() < 2:
        raise InputError(f"{name}: found {labelled.nunique()} group(s) among labelled patients, expected at least 2")
    return labelled


def align(grouping: pd.Series, table: pd.DataFrame, table_name: str) -> tuple[pd.Series, pd.DataFrame]:
    """Grouping and table restricted to the patients both contain, in the grouping's order.

    Raises InputError when no patient is shared or a group is left with a single patient.
    """
    shared = grouping.index.intersection(table.index, sort=False)
    if shared.empty:
        raise InputError(
            f"{table_name}: no patient ID in common with the grouping "
            f"(first grouping ID {grouping.index[0]!r}, first table ID {table.index[0] if len(table) else None!r})"
        )
    labels = grouping.loc[shared]
    if labels.nunique() < 2:
        raise InputError(
            f"{table_name}: the patients it shares with the grouping all belong to group {labels.iloc[0]!r}, "
            "expected at least 2 groups"
        )
    require_two_per_group(labels, table_name)
    return labels, table.loc[shared]


def lonely_group(labels: pd.Series) -> str | None:
    """'group X has 1 patient' for the first group with a single patient, else None."""
    sizes = labels.value_counts()
    lonely = sizes[sizes < 2]
    return f"group {lonely.index[0]!r} has 1 patient" if len(lonely) else None


def untestable(grouping: pd.Series, patients: pd.Index, which: str) -> str | None:
    """Why `grouping` cannot be compared on `patients` (those with data, described by `which`), or None.

    They must hold at least 2 groups and no group of a single patient, e.g. "group 'S3' has 1
    patient measured in rna, expected at least 2 groups of 2 or more" for `which` "measured in rna".
    """
    labelled = check_grouping(grouping)
    labels = labelled[labelled.index.isin(patients)]
    if labels.nunique() == 0:
        problem = "no group has patients"
    elif labels.nunique() == 1:
        problem = f"only group {labels.iloc[0]!r} has patients"
    else:
        problem = lonely_group(labels)
    return None if problem is None else f"{problem} {which}, expected at least 2 groups of 2 or more"


def require_two_per_group(labels: pd.Series, where: str) -> None:
    """Raise InputError naming the first group that has a single patient."""
    lonely = lonely_group(labels)
    if lonely is not None:
        raise InputError(f"{where}: {lonely}, expected at least 2 patients per group")
