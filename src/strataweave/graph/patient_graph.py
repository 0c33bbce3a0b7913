"""PatientGraph: the fused patient-similarity graph with its per-modality graphs and record."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import scipy.sparse as sp

from strataweave.errors import InputError


@dataclass(frozen=True)
class PatientGraph:
    """A sparse patient-similarity graph.

    `affinity` is symmetric CSR over `patients` (zero diagonal, values in [0, 1]);
    `modality_graphs` holds each modality's own k-nearest-neighbour kernel graph on the same
    patients (no edges for patients missing that modality); `presence` says which patient has
    which modality; `fallback_patients` are the patients the fusion rule left without an edge
    and that were connected to their strongest partners in the average graph instead;
    `rule_evidence` has one row per fusion rule considered (a single row unless the rule was
    `auto`) with its confirmed share (see `rule_choice`) and whether it was chosen.
    """

    patients: pd.Index
    affinity: sp.csr_matrix
    rule: str
    fallback_patients: pd.Index = field(default_factory=lambda: pd.Index([], dtype=object))
    modality_graphs: dict[str, sp.csr_matrix] = field(default_factory=dict)
    presence: pd.DataFrame | None = None
    parameters: dict = field(default_factory=dict)
    rule_evidence: pd.DataFrame | None = None

    @property
    def degree(self) -> pd.Series:
        """Number of edges of each patient."""
        return pd.Series(np.diff(self.affinity.indptr), index=self.patients, name="degree")

    @property
    def isolated_patients(self) -> pd.Index:
        """Patients without any edge."""
        return self.patients[np.diff(self.affinity.indptr) == 0]

    def fallback_record(self) -> pd.DataFrame:
        """One row per fallback patient: its fallback edges and the modalities it has."""
        positions = self.patients.get_indexer(self.fallback_patients)
        record = pd.DataFrame(
            {"fallback_edges": np.diff(self.affinity.indptr)[positions]},
            index=pd.Index(self.fallback_patients, name="patient_id"),
        )
        if self.presence is not None:
            present = self.presence.loc[self.fallback_patients]
            record["modalities"] = [",".join(present.columns[row]) for row in present.to_numpy()]
        return record

    def restrict(self, patients) -> PatientGraph:
        """The graph on a subset of patients, in the order given (edges to others dropped)."""
        patients = pd.Index(patients)
        positions = self.patients.get_indexer(patients)
        if (positions < 0).any():
            missing = patients[positions < 0][0]
            raise InputError(f"patients: found {missing!r}, which is not in the graph; expected a subset of its patients")
        if patients.has_duplicates:
            repeated = patients[patients.duplicated()][0]
            raise InputError(f"patients: found {repeated!r} more than once; expected each patient once")
        return PatientGraph(
            patients=patients,
            affinity=_submatrix(self.affinity, positions),
            rule=self.rule,
            fallback_patients=self.fallback_patients.intersection(patients, sort=False),
            modality_graphs={name: _submatrix(graph, positions) for name, graph in self.modality_graphs.items()},
            presence=None if self.presence is None else self.presence.loc[patients],
            parameters=dict(self.parameters),
            rule_evidence=self.rule_evidence,
        )


def _submatrix(matrix: sp.csr_matrix, positions: np.ndarray) -> sp.csr_matrix:
    sub = matrix[positions][:, positions].tocsr()
    sub.sort_indices()
    return sub
