"""Agreement between two labelings: contingency table, ARI, NMI (scikit-learn), and the split/merge flow k -> k+1.

Works on any two groupings of the same patients (two counts, two runs, two methods, or our
subtypes against a clinical grouping). Labels given as pandas Series are aligned on their
patient index; patients missing from either side, or with a missing label, are left out.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score
from sklearn.metrics.cluster import contingency_matrix

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


def _table(a: np.ndarray, b: np.ndarray) -> pd.DataFrame:
    """scikit-learn's contingency matrix, labelled by the sorted labels of each side."""
    counts = contingency_matrix(a, b)
    return pd.DataFrame(counts, index=pd.Index(np.unique(a), name="a"), columns=pd.Index(np.unique(b), name="b"))


def contingency_table(a, b) -> pd.DataFrame:
    """Patients counted by (label in `a`, label in `b`): rows are `a`'s labels, columns `b`'s."""
    return _table(*_paired_labels(a, b))


def compare_partitions(a, b) -> PartitionComparison:
    """ARI, NMI and the contingency table between two labelings of the same patients."""
    a, b = _paired_labels(a, b)
    if a.size == 0:
        raise InputError("labelings: found no patient labelled in both; expected at least one shared patient")
    return PartitionComparison(
        ari=float(adjusted_rand_score(a, b)),
        nmi=float(normalized_mutual_info_score(a, b)),
        contingency=_table(a, b),
        n_patients=int(a.size),
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
