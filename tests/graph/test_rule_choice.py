"""The data-chosen fusion rule: candidates, the confirmed share, and the choice on planted structure."""

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import adjusted_rand_score

from strataweave.graph import fuse_modalities
from strataweave.graph.rule_choice import confirmed_shares, rule_candidates
from strataweave.subtypes.baselines import spectral_labels


def test_candidates_run_from_the_strictest_to_the_loosest():
    assert rule_candidates(1) == [("intersection", None)]
    assert rule_candidates(3) == [("intersection", None), ("quorum", 2), ("quorum", 1), ("average", None)]


def test_confirmed_share_is_the_weight_on_confirmed_pairs_over_the_total():
    weights = np.array([0.5, 0.25, 0.25, 0.0])
    confirmed = np.array([[True, False], [True, True], [False, False], [True, True]])
    np.testing.assert_allclose(confirmed_shares(weights, confirmed), [0.75, 0.25])
    np.testing.assert_array_equal(confirmed_shares(np.zeros(4), confirmed), [0.0, 0.0])


def _blind_views(seed=0, n_per_group=40, n_groups=4):
    """Three views, each blind to a different pair of the four planted groups (merged in that view)."""
    rng = np.random.default_rng(seed)
    truth = np.repeat(np.arange(n_groups), n_per_group)
    patients = pd.Index([f"P{i:03d}" for i in range(truth.size)], name="patient_id")
    views = {}
    for view, merged in enumerate(((0, 1), (1, 2), (2, 3))):
        groups = np.where(truth == merged[1], merged[0], truth)
        centres = rng.normal(0.0, 2.5, (n_groups, 30))
        views[f"v{view}"] = pd.DataFrame(centres[groups] + rng.standard_normal((truth.size, 30)), index=patients)
    return views, truth


def test_auto_prefers_a_quorum_when_every_view_is_blind_to_one_contrast():
    views, truth = _blind_views()
    graph = fuse_modalities(views, rule="auto")
    evidence = graph.rule_evidence
    assert list(zip(evidence["rule"], evidence["quorum"])) == rule_candidates(3)
    assert evidence["chosen"].sum() == 1
    chosen = evidence.loc[evidence["chosen"]].iloc[0]
    assert chosen["confirmed_share"] == evidence["confirmed_share"].max()
    assert (graph.rule, graph.parameters["quorum"]) == (chosen["rule"], chosen["quorum"])
    # Two of three views tell every pair of groups apart, so a quorum of two recovers them all;
    # the chosen graph's spectral labels are at least as good as the intersection's.
    chosen_ari = adjusted_rand_score(truth, spectral_labels(graph.affinity, 4, 0))
    strict = fuse_modalities(views, rule="intersection")
    assert chosen_ari >= adjusted_rand_score(truth, spectral_labels(strict.affinity, 4, 0)) - 1e-9
    assert chosen_ari > 0.9


def test_a_named_rule_is_kept_with_a_single_evidence_row():
    views, _ = _blind_views(seed=1)
    graph = fuse_modalities(views, rule="quorum", quorum=2)
    assert graph.rule == "quorum" and graph.parameters["rule_requested"] == "quorum"
    assert len(graph.rule_evidence) == 1 and bool(graph.rule_evidence["chosen"].iloc[0])


def test_auto_with_a_quorum_is_refused():
    views, _ = _blind_views(seed=2)
    with pytest.raises(Exception, match="quorum"):
        fuse_modalities(views, rule="auto", quorum=2)
