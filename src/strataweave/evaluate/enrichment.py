"""Gene-set enrichment of each group's markers: over-representation and a rank-based competitive test.

Over-representation: hypergeometric test of the group's significant up-markers against the measured
features (the universe). Competitive: Mann-Whitney of the members' marker scores against the
non-members' scores. Both vectorised over sets and groups with a sparse membership matrix.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping

import numpy as np
import pandas as pd
from scipy import sparse, stats

from strataweave.errors import InputError
from strataweave.evaluate.multiple_testing import bh_adjust
from strataweave.evaluate.rank_tests import column_ranks, mann_whitney_from_rank_sums
from strataweave.evaluate.result import Evaluation, plain

_MARKER_COLUMNS = ("group", "feature", "difference", "score", "p_adjusted")
_COUNTS = ("set_size", "n_selected", "overlap")


def set_membership(
    gene_sets: Mapping[str, Iterable[str]], universe: pd.Index, min_size: int, max_size: int
) -> tuple[sparse.csr_matrix, list[str], pd.DataFrame]:
    """Sparse sets x universe membership of the sets whose measured size lies in [min_size, max_size].

    Also returns the kept set names and a table of excluded sets with the reason.
    Raises InputError when no set shares a single feature with the universe.
    """
    names = list(gene_sets)
    members = [pd.Index(pd.unique(pd.Index(list(gene_sets[name]), dtype=object))) for name in names]
    positions = [universe.get_indexer(m) for m in members]
    measured = [p[p >= 0] for p in positions]
    sizes = np.array([m.size for m in measured])
    if names and sizes.max() == 0:
        example = members[0][0] if len(members[0]) else None
        raise InputError(
            f"gene sets: no member of any set is a measured feature (e.g. {example!r} from set {names[0]!r}, "
            f"first feature {universe[0]!r}), expected gene sets named like the modality's features"
        )
    reasons = np.where(sizes == 0, "no overlap with the measured features",
                       np.where(sizes < min_size, f"fewer than {min_size} measured members",
                                np.where(sizes > max_size, f"more than {max_size} measured members", "")))
    keep = np.flatnonzero(reasons == "")
    excluded = pd.DataFrame(
        {
            "set": [names[i] for i in np.flatnonzero(reasons != "")],
            "n_members": [len(members[i]) for i in np.flatnonzero(reasons != "")],
            "n_measured": sizes[reasons != ""],
            "reason": reasons[reasons != ""],
        }
    )
    rows = np.repeat(np.arange(keep.size), sizes[keep])
    columns = np.concatenate([measured[i] for i in keep]) if keep.size else np.array([], dtype=int)
    matrix = sparse.csr_matrix((np.ones(rows.size), (rows, columns)), shape=(keep.size, universe.size))
    return matrix, [names[i] for i in keep], excluded


def _marker_matrices(markers: pd.DataFrame) -> tuple[list, pd.Index, pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    missing = [c for c in _MARKER_COLUMNS if c not in markers.columns]
    if missing:
        raise InputError(f"marker table: no column {missing[0]!r}, expected the table made by find_markers")
    groups = list(pd.unique(markers["group"]))
    wide = markers.pivot(index="feature", columns="group")
    universe = pd.Index(wide.index.astype(str))
    score, difference, p_adjusted = (wide[column][groups].set_axis(universe) for column in ("score", "difference", "p_adjusted"))
    return groups, universe, score, difference, p_adjusted


def _over_representation(membership, names, groups, selected: np.ndarray) -> pd.DataFrame:
    universe_size = membership.shape[1]
    set_size = np.asarray(membership.sum(axis=1)).ravel()[:, None]
    n_selected = selected.sum(axis=0)[None, :]
    overlap = np.asarray(membership @ selected.astype(float))
    p_value = stats.hypergeom.sf(overlap - 1, universe_size, set_size, n_selected)
    p_value = np.where(n_selected > 0, p_value, np.nan)
    expected = set_size * n_selected / universe_size
    with np.errstate(invalid="ignore", divide="ignore"):
        fold = overlap / expected
    return _long(names, groups, {
        "set_size": np.broadcast_to(set_size, overlap.shape),
        "n_selected": np.broadcast_to(n_selected, overlap.shape),
        "overlap": overlap,
        "expected": expected,
        "fold_enrichment": fold,
        "p_value": p_value,
        "p_adjusted": bh_adjust(p_value.T).T,
    })


def _rank_test(membership, names, groups, scores: np.ndarray) -> pd.DataFrame:
    ranks, tie_term = column_ranks(scores)
    set_size = np.asarray(membership.sum(axis=1)).ravel()[:, None]
    result = mann_whitney_from_rank_sums(np.asarray(membership @ ranks), set_size, scores.shape[0], tie_term[None, :])
    return _long(names, groups, {
        "set_size": np.broadcast_to(set_size, result.auc.shape),
        "auc": result.auc,
        "z": result.z,
        "p_value": result.p_value,
        "p_adjusted": bh_adjust(result.p_value.T).T,
    })


def _long(names: list[str], groups: list, columns: dict[str, np.ndarray]) -> pd.DataFrame:
    """Sets x groups matrices as a long table sorted by group, then adjusted and raw p."""
    n_sets = len(names)
    table = pd.DataFrame(
        {
            "group": np.tile(np.asarray(groups, dtype=object), n_sets),
            "set": np.repeat(np.asarray(names, dtype=object), len(groups)),
            **{key: np.asarray(value, dtype=int if key in _COUNTS else float).ravel() for key, value in columns.items()},
        }
    )
    table["_order"] = table["group"].map({g: i for i, g in enumerate(groups)})
    table = table.sort_values(["_order", "p_adjusted", "p_value"], kind="mergesort").drop(columns="_order")
    return table.reset_index(drop=True)


def _top(table: pd.DataFrame, fdr: float, top_n: int) -> pd.DataFrame:
    """Up to `top_n` rows per group with adjusted p below `fdr` (the table is already sorted)."""
    return table[table["p_adjusted"] < fdr].groupby("group", sort=False).head(top_n)


def enrich_markers(
    markers: pd.DataFrame,
    gene_sets: Mapping[str, Iterable[str]],
    marker_fdr: float = 0.05,
    min_set_size: int = 5,
    max_set_size: int = 500,
    sets_per_subtype: int = 10,
) -> Evaluation:
    """Enrichment of each group's markers (the table made by find_markers) in `gene_sets`.

    Selected markers of a group: adjusted p below `marker_fdr` and higher in the group than in the
    rest. Sets are restricted to measured features; sets with fewer than `min_set_size` or more than
    `max_set_size` measured members, or without overlap, are listed in the 'excluded_sets' table
    and counted in the summary. The summary lists up to `sets_per_subtype` sets per group with
    adjusted p below `marker_fdr`.
    """
    groups, universe, scores, difference, p_adjusted = _marker_matrices(markers)
    membership, names, excluded = set_membership(gene_sets, universe, min_set_size, max_set_size)
    selected = ((difference.to_numpy() > 0) & (p_adjusted.to_numpy() < marker_fdr))
    over_representation = _over_representation(membership, names, groups, selected)
    rank_test = _rank_test(membership, names, groups, scores.to_numpy(dtype=float))
    summary = {
        "universe_size": universe.size,
        "n_sets_tested": len(names),
        "n_sets_excluded": len(excluded),
        "excluded_by_reason": excluded["reason"].value_counts().to_dict(),
        "n_selected_markers": {str(g): int(n) for g, n in zip(groups, selected.sum(axis=0))},
        "fdr": marker_fdr,
        "rows": _top(over_representation, marker_fdr, sets_per_subtype)
        .rename(columns={"group": "subtype", "set": "gene_set"}).astype({"subtype": str}),
        "rank_test_rows": _top(rank_test[rank_test["auc"] > 0.5], marker_fdr, sets_per_subtype)
        .rename(columns={"group": "subtype", "set": "gene_set"}).astype({"subtype": str}),
    }
    return Evaluation(
        tables={"over_representation": over_representation, "rank_test": rank_test, "excluded_sets": excluded},
        summary=plain(summary),
    )
