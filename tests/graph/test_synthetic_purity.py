"""Neighbour purity on the invented cohort: fused graphs against each single modality."""

import numpy as np
import pytest

from strataweave.data import Preprocessor
from strataweave.data.synthetic import make_synthetic_cohort
from strataweave.graph import fuse_modalities, neighbour_purity


@pytest.fixture(scope="module")
def cohort_views():
    cohort = make_synthetic_cohort(n_patients=300, seed=5)
    views = {name: Preprocessor(cohort.kinds[name]).fit_transform(cohort.patients_by_features(name))
             for name in cohort.tables}
    return views, cohort.planted


@pytest.mark.slow
def test_fused_graphs_are_purer_than_the_average_single_modality(cohort_views):
    views, planted = cohort_views
    graph = fuse_modalities(views, rule="intersection", n_neighbours=15)
    labels = planted.loc[graph.patients]
    singles = {name: neighbour_purity(g, labels) for name, g in graph.modality_graphs.items()}
    fused = neighbour_purity(graph.affinity, labels)
    # each layer of the invented cohort merges some subtypes, so no single layer is pure;
    # where the layers agree they agree on the planted subtype
    assert fused > np.mean(list(singles.values())) + 0.05
    for rule, quorum in [("quorum", 2), ("average", None)]:
        other = fuse_modalities(views, rule=rule, quorum=quorum, n_neighbours=15)
        assert neighbour_purity(other.affinity, labels) > np.mean(list(singles.values()))
    # chance level: the share of same-subtype pairs among all pairs
    shares = labels.value_counts(normalize=True)
    assert min(singles.values()) > float((shares**2).sum())
