"""Rows of results.json turned into display tables (header + text cells) for the HTML and slides."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Iterable, Sequence

from strataweave.report.formatting import format_p, format_value
from strataweave.report.wording import WORD_COLUMNS, column_words, words


@dataclass(frozen=True)
class Table:
    header: list[str]
    rows: list[list[str]]


def _is_p_column(name: str) -> bool:
    return name.startswith("p_") or name.endswith("_p") or name in {"p", "p_value", "p_adjusted"}


def _cell(column: str, value: Any) -> str:
    """One cell for people: p columns as p, machine words in words, clinical column names readable."""
    if _is_p_column(column):
        return format_p(value)
    if isinstance(value, str) and column in WORD_COLUMNS:
        return words(value)
    if isinstance(value, str) and column == "variable":
        return column_words(value)
    return format_value(value)


def rows_table(rows: Iterable[dict[str, Any]], columns: Sequence[str] | None = None) -> Table:
    """A table of row dicts; columns default to every key in first-seen order; headings in words."""
    rows = list(rows)
    if columns is None:
        columns = list(dict.fromkeys(key for row in rows for key in row))
    body = [[_cell(c, row.get(c)) for c in columns] for row in rows]
    return Table([words(c) for c in columns], body)


def criteria_table(selection: dict[str, Any]) -> Table:
    """One row per subtype count, one column per criterion."""
    names = list(selection["criteria"])
    rows = [[str(count)] + [format_value(selection["criteria"][n][i]) for n in names]
            for i, count in enumerate(selection["counts"])]
    return Table(["subtype count"] + [words(n) for n in names], rows)


def modalities_table(modalities: list[dict[str, Any]]) -> Table:
    """Per modality: kind, patients, features in the file, kept after each filter, missing fraction."""
    rows = []
    for m in modalities:
        steps = " \u2192 ".join(f"{words(s['step'])}: {s['features_after']}" for s in m["filters"])
        kept = m["filters"][-1]["features_after"] if m["filters"] else m["features_in_file"]
        rows.append([m["name"], words(m["kind"]), str(m["patients"]), str(m["features_in_file"]), steps or "\u2013",
                     str(kept), f"{100 * m['missing_fraction']:.1f}%"])
    return Table(["modality", "kind", "patients", "features in file", "kept after each filter", "features used",
                  "missing cells"], rows)


def clinical_summary_table(summary: dict[str, Any]) -> Table:
    """Each clinical variable by group (n (%) or median [IQR]); the variable, its test and adjusted p
    on its first row only."""
    groups = list(summary["groups"])
    rows = []
    for row in summary["rows"]:
        first = bool(row["test"])
        rows.append([column_words(row["variable"]) if first else "", str(row["level"]),
                     *[str(row.get(g, "\u2013")) for g in groups],
                     words(row["test"]) if first else "", format_p(row["p_adjusted"]) if first else ""])
    return Table(["variable", "level", *groups, "test", "adjusted p"], rows)
