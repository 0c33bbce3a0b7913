"""Diagnostics of a PatientGraph as small tables: structure, modality agreement, purity."""

from __future__ import annotations

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from strataweave.errors import InputError
from strataweave.graph.patient_graph import PatientGraph


def _structure(affinity: sp.csr_matrix, members: np.ndarray) -> dict:
    """Counts for the subgraph on `members` (the patients a graph is defined for)."""
    sub = affinity[members][:, members]
    edges_per_patient = np.diff(sub.indptr)
    strength = np.asarray(sub.sum(axis=1)).ravel()
    mean_strength = strength.mean() if len(strength) else 0.0
    return {
        "patients": int(members.sum()),
        "edges": int(sub.nnz // 2),
        "components": int(connected_components(sub, directed=False)[0]) if sub.shape[0] else 0,
        "isolated": int((edges_per_patient == 0).sum()),
        "degree_min": int(edges_per_patient.min(initial=0)),
        "degree_median": float(np.median(edges_per_patient)) if len(edges_per_patient) else 0.0,
        "degree_max": int(edges_per_patient.max(initial=0)),
        "strength_cv": float(strength.std() / mean_strength) if mean_strength > 0 else 0.0,
    }


def graph_diagnostics(graph: PatientGraph) -> pd.DataFrame:
    """One row for the fused graph and one per modality graph (over the patients it has).

    Columns: patients, edges, connected components, isolated patients, edges per patient
    (min, median, max), coefficient of variation of the weighted degree, fallback patients.
    """
    rows = {"fused": {**_structure(graph.affinity, np.ones(len(graph.patients), dtype=bool)),
                      "fallback": len(graph.fallback_patients)}}
    for name, modality in graph.modality_graphs.items():
        members = graph.presence[name].to_numpy() if graph.presence is not None else np.ones(len(graph.patients), bool)
        rows[name] = {**_structure(modality, members), "fallback": 0}
    return pd.DataFrame.from_dict(rows, orient="index").rename_axis("graph")


def modality_agreement(graph: PatientGraph) -> pd.DataFrame:
    """Mean Jaccard overlap of neighbour sets for each pair of modalities (modality x modality).

    Averaged over the patients both modalities have; 1 on the diagonal.
    """
    names = list(graph.modality_graphs)
    binary = {name: (graph.modality_graphs[name] > 0).astype(np.float64).tocsr() for name in names}
    table = pd.DataFrame(np.eye(len(names)), index=names, columns=names)
    for i, first in enumerate(names):
        for second in names[i + 1:]:
            a, b = binary[first], binary[second]
            shared = np.asarray(a.multiply(b).sum(axis=1)).ravel()
            union = np.asarray(a.sum(axis=1)).ravel() + np.asarray(b.sum(axis=1)).ravel() - shared
            both = (np.diff(a.indptr) > 0) & (np.diff(b.indptr) > 0)
            overlap = float(np.mean(shared[both] / union[both])) if both.any() else float("nan")
            table.loc[first, second] = table.loc[second, first] = overlap
    return table


def neighbour_purity(affinity: sp.spmatrix, labels) -> float:
    """Share of a patient's neighbours with the same label, averaged over patients with edges."""
    affinity = sp.csr_matrix(affinity)
    codes = pd.factorize(pd.Series(labels).to_numpy())[0]
    rows = np.repeat(np.arange(affinity.shape[0]), np.diff(affinity.indptr))
    same = np.bincount(rows, weights=codes[rows] == codes[affinity.indices], minlength=affinity.shape[0])
    count = np.diff(affinity.indptr)
    has = count > 0
    return float(np.mean(same[has] / count[has])) if has.any() else float("nan")


def modularity(affinity: sp.spmatrix, labels) -> float:
    """Newman's modularity of a partition on a weighted graph (Newman 2006, PNAS).

    Q = sum over groups of (within-group share of the edge weight) - (group's share of the
    total degree)^2: how much more weight the groups keep inside than a random graph with
    the same degrees would. 0 for one group; higher is a better fit of partition to graph.
    """
    affinity = sp.csr_matrix(affinity, dtype=np.float64)
    _, codes = np.unique(np.asarray(labels), return_inverse=True)
    if codes.size != affinity.shape[0]:
        raise InputError(f"labels: found {codes.size}; expected one per patient ({affinity.shape[0]})")
    degree = np.asarray(affinity.sum(axis=1)).ravel()
    total = degree.sum()
    if total <= 0:
        return 0.0
    membership = sp.csr_matrix((np.ones(codes.size), (np.arange(codes.size), codes)))
    within = (membership.T @ affinity @ membership).diagonal()
    group_degree = membership.T @ degree
    return float(within.sum() / total - np.sum((group_degree / total) ** 2))
