"""Readers for gene-set files: a two-column table (set, gene) and one set per tab-separated line.

Both return an ordered dict: set name -> list of distinct members in file order.
"""

from __future__ import annotations

import os
from pathlib import Path

from strataweave.errors import InputError


def _read_text(path: str | os.PathLike) -> list[str]:
    try:
        return Path(path).read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError) as error:
        raise InputError(f"{path}: cannot be read as UTF-8 text ({error.__class__.__name__}), expected a gene-set file") from None


def _add(sets: dict[str, list[str]], seen: dict[str, set], name: str, gene: str) -> None:
    if gene not in seen.setdefault(name, set()):
        seen[name].add(gene)
        sets.setdefault(name, []).append(gene)


def read_gene_set_table(path: str | os.PathLike, set_column: str = "set", gene_column: str = "gene") -> dict[str, list[str]]:
    """Gene sets from a tab-separated table with a header and one (set, gene) pair per row."""
    lines = _read_text(path)
    if not lines:
        raise InputError(f"{path}: file is empty, expected a header line with columns {set_column!r} and {gene_column!r}")
    header = lines[0].split("\t")
    for column in (set_column, gene_column):
        if column not in header:
            raise InputError(f"{path}, line 1: no column {column!r} in header {header!r}, expected {set_column!r} and {gene_column!r}")
    set_at, gene_at = header.index(set_column), header.index(gene_column)
    sets: dict[str, list[str]] = {}
    seen: dict[str, set] = {}
    for number, line in enumerate(lines[1:], start=2):
        if not line.strip():
            continue
        fields = [field.strip() for field in line.split("\t")]
        if len(fields) <= max(set_at, gene_at) or not fields[set_at] or not fields[gene_at]:
            raise InputError(f"{path}, line {number}: found {line!r}, expected a set name and a gene separated by a tab")
        _add(sets, seen, fields[set_at], fields[gene_at])
    if not sets:
        raise InputError(f"{path}: no gene set found below the header, expected rows of set name and gene")
    return sets


def read_gene_set_lines(path: str | os.PathLike) -> dict[str, list[str]]:
    """Gene sets from tab-separated lines: set name, description, then the members."""
    sets: dict[str, list[str]] = {}
    seen: dict[str, set] = {}
    for number, line in enumerate(_read_text(path), start=1):
        if not line.strip():
            continue
        fields = [field.strip() for field in line.split("\t")]
        members = [gene for gene in fields[2:] if gene]
        if not fields[0] or not members:
            raise InputError(
                f"{path}, line {number}: found {len(members)} member(s) for set {fields[0]!r}, "
                "expected a set name, a description and at least one member separated by tabs"
            )
        if fields[0] in sets:
            raise InputError(f"{path}, line {number}: set {fields[0]!r} appears again, expected each set name once")
        for gene in members:
            _add(sets, seen, fields[0], gene)
    if not sets:
        raise InputError(f"{path}: no gene set found, expected lines of set name, description and members")
    return sets
