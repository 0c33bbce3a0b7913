"""Agreement between two labelings: contingency table, ARI, NMI, and the split/merge flow k -> k+1.

Works on any two groupings of the same patients (two counts, two runs, two methods, or our
subtypes against a clinical grouping). Labels given as pandas Series are aligned on their
patient index; patients missing from either side, or with a missing label, are left out.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from strataweave.errors import InputError


@dataclass(frozen=True)
class PartitionComparison:
    """ARI, NMI (arithmetic-mean normalisation) and the contingency table of two labelings."""

    ari: float
    nmi: float
    contingency: pd.DataFrame
    n_patients: int

    def to_dict(self) -> dict:
        """JSON-ready form: the contingency as nested {row label: {column label: count}}."""
        table = {str(r): {str(c): int(v) for c, v in row.items()} for r, row in self.contingency.iterrows()}
        return {"ari": self.ari, "nmi": self.nmi, "n_patients": self.n_patients, "contingency": table}


def _paired_labels(a, b) -> tuple[np.ndarray, np.ndarray]:
    """Two equally long label arrays: Series aligned on their index, arrays taken as they are."""
    if isinstance(a, pd.Series) and isinstance(b, pd.Series):
        shared = a.index.intersection(b.index, sort=False)
        a, b = a.loc[shared], b.loc[shared]
        keep = (a.notna() & b.notna()).to_numpy()
        return a.to_numpy()[keep], b.to_numpy()[keep]
    a, b = np.asarray(a), np.asarray(b)
    if a.ndim != 1 or b.ndim != 1 or a.shape != b.shape:
        raise InputError(
            f"labelings: found shapes {a.shape} and {b.shape}; expected two 1-D labelings of equal length"
        )
    return a, b


def contingency_table(a, b) -> pd.DataFrame:
    """Patients counted by (label in `a`, label in `b`): rows are `a`'s labels, columns `b`'s."""
    a, b = _paired_labels(a, b)
    rows, row_codes = np.unique(a, return_inverse=True)
    cols, col_codes = np.unique(b, return_inverse=True)
    counts = np.zeros((rows.size, cols.size), dtype=np.int64)
    np.add.at(counts, (row_codes, col_codes), 1)
    return pd.DataFrame(counts, index=pd.Index(rows, name="a"), columns=pd.Index(cols, name="b"))


def _pairs(x: np.ndarray) -> np.ndarray | float:
    return x * (x - 1) / 2.0


def ari_from_contingency(counts: np.ndarray) -> float:
    """Adjusted Rand index (Hubert and Arabie 1985) of a contingency table of counts."""
    counts = np.asarray(counts, dtype=np.float64)
    n = counts.sum()
    index = _pairs(counts).sum()
    rows = _pairs(counts.sum(axis=1)).sum()
    cols = _pairs(counts.sum(axis=0)).sum()
    expected = rows * cols / _pairs(n) if n > 1 else 0.0
    maximum = (rows + cols) / 2.0
    if maximum == expected:  # both labelings trivial (one group each, or all singletons): identical
        return 1.0
    return float((index - expected) / (maximum - expected))


def nmi_from_contingency(counts: np.ndarray) -> float:
    """Mutual information normalised by the mean of the two entropies (natural log)."""
    counts = np.asarray(counts, dtype=np.float64)
    if counts.shape[0] == counts.shape[1] == 1:  # one group on both sides: a perfect match
        return 1.0
    n = counts.sum()
    joint = counts[counts > 0] / n
    p_rows = counts.sum(axis=1) / n
    p_cols = counts.sum(axis=0) / n
    outer = np.outer(p_rows, p_cols)[counts > 0]
    mutual = float(np.sum(joint * np.log(joint / outer)))
    entropy_rows = -float(np.sum(p_rows[p_rows > 0] * np.log(p_rows[p_rows > 0])))
    entropy_cols = -float(np.sum(p_cols[p_cols > 0] * np.log(p_cols[p_cols > 0])))
    denominator = (entropy_rows + entropy_cols) / 2.0
    if denominator <= 0.0:
        return 0.0
    return float(max(mutual, 0.0) / denominator)


def adjusted_rand(a, b) -> float:
    """ARI between two labelings of the same patients."""
    return ari_from_contingency(contingency_table(a, b).to_numpy())


def compare_partitions(a, b) -> PartitionComparison:
    """ARI, NMI and the contingency table between two labelings of the same patients."""
    table = contingency_table(a, b)
    counts = table.to_numpy()
    if counts.sum() == 0:
        raise InputError("labelings: found no patient labelled in both; expected at least one shared patient")
    return PartitionComparison(
        ari=ari_from_contingency(counts),
        nmi=nmi_from_contingency(counts),
        contingency=table,
        n_patients=int(counts.sum()),
    )


def split_flow(labels_k, labels_k1) -> pd.DataFrame:
    """How the subtypes at one count split and merge into those at the next count.

    One row per non-empty flow: ``from_subtype``, ``to_subtype``, ``patients`` and
    ``share_of_from`` (the fraction of the `from` subtype that went to `to`).
    """
    table = contingency_table(labels_k, labels_k1)
    flows = table.stack().rename("patients").reset_index()
    flows.columns = ["from_subtype", "to_subtype", "patients"]
    flows = flows[flows["patients"] > 0].reset_index(drop=True)
    sizes = table.sum(axis=1)
    flows["share_of_from"] = flows["patients"] / sizes.loc[flows["from_subtype"]].to_numpy()
    return flows
