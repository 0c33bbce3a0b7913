"""What the comparison page knows about two partitions: their names, the contingency table, ARI and NMI.

Built by `strataweave compare` from two finished runs; holds counts only, never a patient identifier.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class ComparisonView:
    """Rows of `contingency` are the subtypes of run A, columns those of run B, cells patients in both."""

    name_a: str
    name_b: str
    contingency: pd.DataFrame
    ari: float
    nmi: float
    n_patients: int
    caution: str

    @property
    def counts(self) -> np.ndarray:
        return self.contingency.to_numpy(dtype=np.int64)

    @property
    def labels_a(self) -> list[str]:
        return [str(label) for label in self.contingency.index]

    @property
    def labels_b(self) -> list[str]:
        return [str(label) for label in self.contingency.columns]

    @property
    def row_shares(self) -> np.ndarray:
        """Each cell as a share of its row: where the patients of one subtype of run A went in run B."""
        counts = self.counts
        totals = counts.sum(axis=1, keepdims=True)
        return np.divide(counts, totals, out=np.zeros(counts.shape), where=totals > 0)
