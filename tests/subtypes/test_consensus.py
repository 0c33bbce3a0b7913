"""Consensus matrix, PAC, cophenetic correlation and core flags on toy cases worked by hand."""

import numpy as np
import pytest
from scipy.cluster.hierarchy import average, cophenet
from scipy.spatial.distance import squareform

from strataweave import InputError
from strataweave.subtypes.consensus import consensus_matrix, consensus_with_subtypes, core_flags
from strataweave.subtypes.criteria import cophenetic_correlation, pac, resample_stability

# three resamples of four patients, -1 = not drawn
TOY = np.array([[0, 0, 1, -1], [1, 1, -1, 0], [-1, 0, 0, 1]])


def test_consensus_on_a_toy_case_computed_by_hand():
    # by hand: (0,1) together in both shared resamples; (1,2) in 1 of 2; all other pairs 0
    expected = np.array(
        [[1.0, 1.0, 0.0, 0.0], [1.0, 1.0, 0.5, 0.0], [0.0, 0.5, 1.0, 0.0], [0.0, 0.0, 0.0, 1.0]]
    )
    np.testing.assert_allclose(consensus_matrix(TOY), expected)


def test_pairs_never_drawn_together_are_undefined_and_left_out_of_pac():
    labels = np.array([[0, 0, -1], [-1, 1, 0]])
    consensus = consensus_matrix(labels)
    assert np.isnan(consensus[0, 2]) and np.isnan(consensus[2, 0])
    assert consensus[1, 2] == 0.0 and consensus[0, 1] == 1.0
    assert pac(consensus) == 0.0


def test_pac_on_the_toy_case_and_its_window():
    consensus = consensus_matrix(TOY)
    # by hand: pair values 1, 0, 0, 0.5, 0, 0 -> one in (0.1, 0.9]
    assert pac(consensus) == pytest.approx(1 / 6)
    assert pac(consensus, window=(0.6, 0.9)) == 0.0
    with pytest.raises(InputError, match="pac_window"):
        pac(consensus, window=(0.9, 0.1))


def test_cophenetic_correlation_by_hand_and_against_scipy():
    # three patients with distances 0.2, 0.6, 0.8: average linkage merges (0,1) at 0.2, then at 0.7;
    # Pearson correlation of (0.2, 0.6, 0.8) with (0.2, 0.7, 0.7) is 0.9449 (worked by hand)
    consensus = 1.0 - squareform([0.2, 0.6, 0.8])
    assert cophenetic_correlation(consensus) == pytest.approx(0.944911, abs=1e-6)
    rng = np.random.default_rng(5)
    labels = np.where(rng.random((30, 25)) < 0.8, rng.integers(0, 3, (30, 25)), -1)
    consensus = consensus_matrix(labels)
    # reference: scipy.cluster.hierarchy.cophenet on average linkage of 1 - consensus
    distances = squareform(1.0 - consensus.astype(np.float64), checks=False)
    expected, _ = cophenet(average(distances), distances)
    assert cophenetic_correlation(consensus) == pytest.approx(expected, abs=1e-10)


def test_perfect_consensus_has_cophenetic_one_and_pac_zero():
    labels = np.tile([0, 0, 1, 1, 2, 2], (5, 1))
    consensus = consensus_matrix(labels)
    # Brunet et al. 2004: a perfect consensus matrix gives cophenetic correlation 1
    assert cophenetic_correlation(consensus) == pytest.approx(1.0)
    assert pac(consensus) == 0.0
    assert resample_stability(labels, labels[0]) == 1.0


def test_core_flags_mark_patients_kept_with_their_subtype():
    labels = np.array([[0, 0, 0, 1, 1], [0, 0, 1, 1, 1], [0, 0, 0, 1, 1], [1, 1, 1, 0, 0]])
    consensus = consensus_matrix(labels)
    full = np.array([0, 0, 0, 1, 1])
    own, core = core_flags(consensus, full, threshold=0.8)
    # by hand: patient 2 sits with 0/1 in 3 of 4 resamples, with 3/4 in 1 of 4
    np.testing.assert_allclose(own, [0.875, 0.875, 0.75, 1.0, 1.0])
    assert core.tolist() == [True, True, False, True, True]
    np.testing.assert_allclose(consensus_with_subtypes(consensus, full)[2], [0.75, 0.25])


def test_bad_resample_labels_are_input_errors():
    with pytest.raises(InputError, match="2-D integer"):
        consensus_matrix(np.zeros(4))
    with pytest.raises(InputError, match="found label -2"):
        consensus_matrix(np.array([[0, -2]]))
