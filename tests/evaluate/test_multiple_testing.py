"""Benjamini-Hochberg adjustment against the 1995 worked example and statsmodels."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from statsmodels.stats.multitest import multipletests

from strataweave.evaluate.multiple_testing import bh_adjust

# Benjamini & Hochberg (1995, JRSS-B 57:289-300), section 4: the 15 p-values of the
# myocardial-infarction example (recalled from memory); at q = 0.05 the procedure rejects 4.
BH_1995_P = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344,
             0.0459, 0.3240, 0.4262, 0.5719, 0.6528, 0.7590, 1.0000]


def test_bh_1995_worked_example_rejects_four():
    adjusted = bh_adjust(BH_1995_P)
    assert int((adjusted <= 0.05).sum()) == 4  # Benjamini & Hochberg 1995 (recalled from memory)


def test_bh_matches_statsmodels_and_keeps_nan_out():
    rng = np.random.default_rng(3)
    p = np.concatenate([rng.uniform(size=40), rng.uniform(0, 0.01, size=10)])
    reference = multipletests(p, method="fdr_bh")[1]  # statsmodels as reference
    np.testing.assert_allclose(bh_adjust(p), reference, rtol=1e-12)
    with_gaps = np.insert(p, [3, 17], np.nan)
    adjusted = bh_adjust(with_gaps)
    assert np.isnan(adjusted[[3, 18]]).all()
    np.testing.assert_allclose(adjusted[~np.isnan(with_gaps)], reference, rtol=1e-12)


def test_bh_adjusts_each_row_of_a_matrix():
    rng = np.random.default_rng(4)
    p = rng.uniform(size=(3, 25))
    adjusted = bh_adjust(p)
    for row, raw in zip(adjusted, p):
        np.testing.assert_allclose(row, multipletests(raw, method="fdr_bh")[1])  # statsmodels


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(0, 1), min_size=1, max_size=30))
def test_bh_never_below_raw_and_keeps_order(p):
    p = np.array(p)
    adjusted = bh_adjust(p)
    assert (adjusted >= p - 1e-15).all() and (adjusted <= 1).all()
    order = np.argsort(p, kind="mergesort")
    assert (np.diff(adjusted[order]) >= -1e-15).all()


def test_bh_leaves_each_rows_nan_out_of_its_own_count():
    rng = np.random.default_rng(5)
    p = rng.uniform(size=(3, 20))
    p[0, [2, 9]] = np.nan
    p[2] = np.nan
    adjusted = bh_adjust(p)
    assert np.isnan(adjusted[0, [2, 9]]).all() and np.isnan(adjusted[2]).all()
    kept = ~np.isnan(p[0])
    np.testing.assert_allclose(adjusted[0, kept], multipletests(p[0, kept], method="fdr_bh")[1])  # statsmodels
    np.testing.assert_allclose(adjusted[1], multipletests(p[1], method="fdr_bh")[1])  # statsmodels
