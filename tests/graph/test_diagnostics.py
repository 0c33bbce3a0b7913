"""Diagnostics tables against scipy's connected components and hand-checked small graphs."""

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from strataweave.graph import fuse_modalities, graph_diagnostics, modality_agreement, neighbour_purity
from strataweave.graph.patient_graph import PatientGraph


def _graph(dense, modality_graphs=None, presence=None):
    patients = pd.Index([f"p{i}" for i in range(len(dense))])
    return PatientGraph(patients=patients, affinity=sp.csr_matrix(dense), rule="average",
                        modality_graphs=modality_graphs or {}, presence=presence)


def test_structure_of_a_small_graph():
    dense = np.zeros((6, 6))
    for a, b, w in [(0, 1, 0.5), (1, 2, 0.5), (3, 4, 1.0)]:
        dense[a, b] = dense[b, a] = w
    row = graph_diagnostics(_graph(dense)).loc["fused"]
    # scipy.sparse.csgraph.connected_components as the reference count
    assert row["components"] == connected_components(sp.csr_matrix(dense))[0] == 3
    assert (row["patients"], row["edges"], row["isolated"]) == (6, 3, 1)
    assert (row["degree_min"], row["degree_median"], row["degree_max"]) == (0, 1.0, 2)
    strength = dense.sum(axis=1)
    assert row["strength_cv"] == pytest.approx(strength.std() / strength.mean())


def test_modality_rows_count_only_patients_that_have_the_modality():
    rng = np.random.default_rng(31)
    ids = [f"p{i:02d}" for i in range(30)]
    data = {"a": pd.DataFrame(rng.normal(size=(30, 3)), index=ids),
            "b": pd.DataFrame(rng.normal(size=(20, 3)), index=ids[:20])}
    table = graph_diagnostics(fuse_modalities(data, n_neighbours=4))
    assert list(table.index) == ["fused", "a", "b"]
    assert table.loc["b", "patients"] == 20 and table.loc["b", "isolated"] == 0
    assert table.loc["fused", "fallback"] == 0


def test_agreement_is_the_jaccard_overlap_of_neighbour_sets():
    first = np.zeros((4, 4))
    second = np.zeros((4, 4))
    for a, b in [(0, 1), (2, 3)]:
        first[a, b] = first[b, a] = 1
    for a, b in [(0, 1), (1, 2)]:
        second[a, b] = second[b, a] = 1
    presence = pd.DataFrame(True, index=[f"p{i}" for i in range(4)], columns=["x", "y"])
    graph = _graph(first, {"x": sp.csr_matrix(first), "y": sp.csr_matrix(second)}, presence)
    table = modality_agreement(graph)
    # neighbour sets: p0 {1}/{1} -> 1; p1 {0}/{0,2} -> 1/2; p2 {3}/{1} -> 0; p3 {2}/{} not in both
    assert table.loc["x", "y"] == table.loc["y", "x"] == pytest.approx((1 + 0.5 + 0) / 3)
    assert table.loc["x", "x"] == 1


def test_neighbour_purity_counts_same_label_neighbours():
    dense = np.zeros((4, 4))
    for a, b in [(0, 1), (0, 2), (2, 3)]:
        dense[a, b] = dense[b, a] = 1
    labels = ["u", "u", "v", "v"]
    # p0: {1, 2} -> 1/2; p1: {0} -> 1; p2: {0, 3} -> 1/2; p3: {2} -> 1
    assert neighbour_purity(sp.csr_matrix(dense), labels) == pytest.approx(0.75)
