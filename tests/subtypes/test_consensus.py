"""Consensus matrix, PAC, cophenetic correlation and core flags on toy cases worked by hand, and the
blocked computation equal to the dense one."""

import numpy as np
import pytest
from scipy.cluster.hierarchy import average, cophenet
from scipy.spatial.distance import squareform

from strataweave import InputError
from strataweave.subtypes import consensus
from strataweave.subtypes.consensus import consensus_matrix, kept_patients, summarise_consensus
from strataweave.subtypes.criteria import cophenetic_correlation, resample_stability

# three resamples of four patients, -1 = not drawn
TOY = np.array([[0, 0, 1, -1], [1, 1, -1, 0], [-1, 0, 0, 1]])


def test_consensus_on_a_toy_case_computed_by_hand():
    # by hand: (0,1) together in both shared resamples; (1,2) in 1 of 2; all other pairs 0
    expected = np.array(
        [[1.0, 1.0, 0.0, 0.0], [1.0, 1.0, 0.5, 0.0], [0.0, 0.5, 1.0, 0.0], [0.0, 0.0, 0.0, 1.0]]
    )
    np.testing.assert_allclose(consensus_matrix(TOY), expected)


def pac(labels, window=(0.1, 0.9)):
    return summarise_consensus(labels, np.zeros(labels.shape[1], dtype=int), window).pac


def test_pairs_never_drawn_together_are_undefined_and_left_out_of_pac():
    labels = np.array([[0, 0, -1], [-1, 1, 0]])
    consensus = consensus_matrix(labels)
    assert np.isnan(consensus[0, 2]) and np.isnan(consensus[2, 0])
    assert consensus[1, 2] == 0.0 and consensus[0, 1] == 1.0
    assert pac(labels) == 0.0


def test_pac_on_the_toy_case_and_its_window():
    # by hand: pair values 1, 0, 0, 0.5, 0, 0 -> one in (0.1, 0.9]
    assert pac(TOY) == pytest.approx(1 / 6)
    assert pac(TOY, window=(0.6, 0.9)) == 0.0
    with pytest.raises(InputError, match="pac_window"):
        pac(TOY, window=(0.9, 0.1))


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
    assert pac(labels) == 0.0
    assert resample_stability(labels, labels[0]) == 1.0


def test_core_flags_mark_patients_kept_with_their_subtype():
    labels = np.array([[0, 0, 0, 1, 1], [0, 0, 1, 1, 1], [0, 0, 0, 1, 1], [1, 1, 1, 0, 0]])
    full = np.array([0, 0, 0, 1, 1])
    summary = summarise_consensus(labels, full)
    own, core = summary.own, summary.core(threshold=0.8)
    # by hand: patient 2 sits with 0/1 in 3 of 4 resamples, with 3/4 in 1 of 4
    np.testing.assert_allclose(own, [0.875, 0.875, 0.75, 1.0, 1.0])
    assert core.tolist() == [True, True, False, True, True]
    np.testing.assert_allclose(summary.with_subtypes[2], [0.75, 0.25])


def dense_summary(labels, full, window):
    """PAC and mean consensus with each subtype straight from the whole float32 matrix, pair by pair
    (entries are compared with the window in float32, as stored)."""
    matrix = consensus_matrix(labels)
    n = full.size
    pairs = [matrix[i, j] for i in range(n) for j in range(i + 1, n) if np.isfinite(matrix[i, j])]
    ambiguous = np.mean([(window[0] < v <= window[1]) for v in pairs])
    with_subtypes = np.array([
        [np.nanmean([matrix[i, j] for j in range(n) if j != i and full[j] == g] or [np.nan]) for g in range(3)]
        for i in range(n)
    ])
    return ambiguous, with_subtypes, matrix


def test_blocks_give_the_dense_results_whatever_the_block_size(monkeypatch):
    rng = np.random.default_rng(11)
    labels = np.where(rng.random((12, 57)) < 0.8, rng.integers(0, 3, (12, 57)), -1)
    full = rng.integers(0, 3, 57)
    ambiguous, with_subtypes, matrix = dense_summary(labels, full, (0.1, 0.9))
    kept = np.array([2, 9, 10, 40, 56])
    for entries in (57 * 57, 57 * 5, 1):  # one block, blocks of five rows, one row at a time
        monkeypatch.setattr(consensus, "BLOCK_ENTRIES", entries)
        summary = summarise_consensus(labels, full, (0.1, 0.9), kept)
        assert summary.pac == pytest.approx(ambiguous, abs=1e-12)
        np.testing.assert_allclose(summary.with_subtypes, with_subtypes, rtol=1e-6, equal_nan=True)
        np.testing.assert_array_equal(summary.matrix, matrix[np.ix_(kept, kept)])


def test_the_kept_matrix_covers_everyone_in_a_small_cohort_and_a_seeded_sample_in_a_large_one():
    np.testing.assert_array_equal(kept_patients(consensus.KEPT_SIDE, seed=3), np.arange(consensus.KEPT_SIDE))
    sample = kept_patients(3 * consensus.KEPT_SIDE, seed=3)
    assert sample.size == consensus.KEPT_SIDE == np.unique(sample).size
    assert np.all(np.diff(sample) > 0) and sample.max() < 3 * consensus.KEPT_SIDE
    np.testing.assert_array_equal(sample, kept_patients(3 * consensus.KEPT_SIDE, seed=3))
    assert not np.array_equal(sample, kept_patients(3 * consensus.KEPT_SIDE, seed=4))


def test_bad_resample_labels_are_input_errors():
    with pytest.raises(InputError, match="2-D integer"):
        consensus_matrix(np.zeros(4))
    with pytest.raises(InputError, match="found label -2"):
        consensus_matrix(np.array([[0, -2]]))
