"""Normalisation, filters, imputation and scaling checked against published examples and reference libraries."""

import math

import numpy as np
import pandas as pd
import pytest
from pydeseq2.preprocessing import deseq2_norm
from scipy.stats import median_abs_deviation, zscore
from sklearn.impute import KNNImputer

from strataweave.data import Preprocessor
from strataweave.data.filters import feature_mad, top_ranked
from strataweave.data.moments import feature_median
from strataweave.data.normalise import log2_cpm, m_values, median_ratio_offsets, quantile_apply, quantile_reference


def _frame(values, prefix="G"):
    values = np.asarray(values, dtype=float)
    return pd.DataFrame(
        values,
        index=[f"P{i}" for i in range(values.shape[0])],
        columns=[f"{prefix}{j}" for j in range(values.shape[1])],
    )


def test_log2_cpm_matches_hand_computation():
    # Definition (Law et al. 2014, voom): log2((count + 0.5) / (library + 1) * 1e6).
    # Patient with counts 1 and 3: library 4 -> 1.5 / 5 * 1e6 = 300000 and 3.5 / 5 * 1e6 = 700000.
    # Patient with counts 10, 0: library 10 -> 10.5 / 11 * 1e6 and 0.5 / 11 * 1e6.
    got = log2_cpm(np.array([[1.0, 3.0], [10.0, 0.0]]), prior_count=0.5)
    expected = [[math.log2(300000), math.log2(700000)], [math.log2(10.5 / 11 * 1e6), math.log2(0.5 / 11 * 1e6)]]
    np.testing.assert_allclose(got, expected, rtol=1e-14)


def test_median_ratio_library_size_matches_pydeseq2():
    # Reference library: pydeseq2 (PyPI), deseq2_norm, the median-of-ratios size factors of
    # Anders & Huber 2010. With no zero counts and a negligible prior, log2 CPM re-centred by
    # median_ratio_offsets must equal log2 of pydeseq2's normalised counts up to one constant.
    rng = np.random.default_rng(7)
    counts = rng.poisson(rng.lognormal(4.0, 1.0, 60) * rng.lognormal(0.0, 0.5, (25, 1))).astype(float) + 1.0
    counts[3, 5] *= 5000.0  # one feature holding most of one patient's reads
    log_values = log2_cpm(counts, prior_count=1e-9)
    recentred = log_values - median_ratio_offsets(log_values, log_values.mean(axis=0))
    normed, _ = deseq2_norm(counts)
    difference = recentred - np.log2(normed)
    np.testing.assert_allclose(difference, difference[0, 0], rtol=0, atol=1e-6)
    # The total-count library lets the dominant feature push down every other feature of patient 3.
    assert np.ptp(log_values - np.log2(normed)) > 1.0


def test_m_values_of_published_formula():
    # Du et al. 2010 (BMC Bioinformatics): M = log2(beta / (1 - beta)); 0.5 -> 0, 0.8 -> log2(4) = 2.
    got = m_values(np.array([[0.5, 0.8, 0.2]]), beta_floor=1e-6)
    assert got[0, 0] == 0.0
    # 0.8 has no exact binary form (it is 0.8 + 4e-17), so 2 holds to one unit in the last place.
    assert got[0, 1] == pytest.approx(2.0, rel=0, abs=np.spacing(2.0))
    assert got[0, 2] == pytest.approx(-2.0, rel=0, abs=np.spacing(2.0))
    np.testing.assert_allclose(m_values(np.array([[0.0, 1.0]]), beta_floor=0.2), [[-2.0, 2.0]], rtol=0, atol=1e-15)


def test_quantile_normalisation_worked_example():
    # Worked by hand from the definition in Bolstad et al. 2003 (Bioinformatics): sort each
    # array, average the sorted arrays rank by rank, give each value the mean of its rank.
    # Arrays (here rows) A=(5,2,3,4), B=(4,1,4.5,2), C=(3,4,6,8).
    # Sorted: A 2,3,4,5; B 1,2,4,4.5; C 3,4,6,8 -> rank means 2, 3, 14/3, 17.5/3.
    values = np.array([[5, 2, 3, 4], [4, 1, 4.5, 2], [3, 4, 6, 8]], dtype=float)
    reference = quantile_reference(values)
    np.testing.assert_allclose(reference, [2, 3, 14 / 3, 17.5 / 3], rtol=1e-14)
    expected = [[17.5 / 3, 2, 3, 14 / 3], [14 / 3, 2, 17.5 / 3, 3], [2, 3, 14 / 3, 17.5 / 3]]
    np.testing.assert_allclose(quantile_apply(values, reference), expected, rtol=1e-14)


def test_quantile_normalised_patients_share_one_sorted_distribution():
    # Property stated by Bolstad et al. 2003: after normalisation every array has the same distribution.
    rng = np.random.default_rng(3)
    values = rng.lognormal(size=(30, 200)) * rng.uniform(0.5, 3, size=(30, 1))
    out = quantile_apply(values, quantile_reference(values))
    sorted_rows = np.sort(out, axis=1)
    np.testing.assert_allclose(sorted_rows, np.broadcast_to(sorted_rows[0], sorted_rows.shape), rtol=1e-12)


def test_quantile_reference_with_missing_cells_resamples_each_patient():
    # A patient with a missing cell is resampled onto the full quantile grid by linear
    # interpolation: observed (1, 3, 5) at quantiles 0, 1/3, 2/3, 1 gives 1, 2.333, 3.667, 5.
    values = np.array([[1.0, np.nan, 3.0, 5.0], [2.0, 4.0, 6.0, 8.0]])
    expected = (np.array([1, 1 + 4 / 3, 1 + 8 / 3, 5]) + np.array([2, 4, 6, 8])) / 2
    np.testing.assert_allclose(quantile_reference(values), expected, rtol=1e-14)
    out = quantile_apply(values, quantile_reference(values))
    assert np.isnan(out[0, 1]) and out[0, 0] == expected[0] and out[0, 3] == expected[3]


def test_knn_imputation_equals_scikit_learn():
    # Reference library: scikit-learn's KNNImputer on the same log-expression matrix.
    rng = np.random.default_rng(5)
    values = rng.normal(size=(40, 25))
    values[rng.random(values.shape) < 0.1] = np.nan
    raw = _frame(values)
    pre = Preprocessor("log_expression", impute="knn", impute_neighbours=4, scale="none", max_missing_fraction=1.0)
    got = pre.fit_transform(raw)
    expected = KNNImputer(n_neighbors=4).fit_transform(values)
    np.testing.assert_allclose(got.to_numpy(), expected, rtol=1e-12)


def test_median_imputation_equals_pandas_median():
    # Reference library: pandas DataFrame.median (skips missing cells).
    rng = np.random.default_rng(6)
    values = rng.normal(size=(15, 6))
    values[rng.random(values.shape) < 0.2] = np.nan
    raw = _frame(values)
    got = Preprocessor("log_expression", impute="median", scale="none", max_missing_fraction=1.0).fit_transform(raw)
    np.testing.assert_allclose(got.to_numpy(), raw.fillna(raw.median()).to_numpy(), rtol=1e-14)


def test_zscore_equals_scipy():
    # Reference library: scipy.stats.zscore (population standard deviation, ddof=0).
    rng = np.random.default_rng(7)
    values = rng.normal(3, 2, size=(50, 12))
    got = Preprocessor("log_expression", impute="none").fit_transform(_frame(values))
    np.testing.assert_allclose(got.to_numpy(), zscore(values, axis=0), rtol=1e-10, atol=1e-12)


def test_top_features_by_variance_and_mad_match_pandas_and_scipy():
    # Reference libraries: pandas DataFrame.var (ddof=1) and scipy.stats.median_abs_deviation.
    rng = np.random.default_rng(8)
    values = rng.normal(size=(30, 40)) * rng.uniform(0.1, 5, size=40)
    by_variance = top_ranked(values, 7, "variance")
    expected = pd.Series(values.var(axis=0, ddof=1)).nlargest(7).index
    assert set(np.flatnonzero(by_variance)) == set(expected)
    by_mad = top_ranked(values, 7, "mad")
    expected_mad = np.argsort(-median_abs_deviation(values, axis=0))[:7]
    assert set(np.flatnonzero(by_mad)) == set(expected_mad)


def test_medians_and_mad_with_missing_cells_match_numpy_and_scipy():
    # Reference libraries: numpy.nanmedian and scipy.stats.median_abs_deviation(nan_policy="omit").
    rng = np.random.default_rng(10)
    values = rng.normal(size=(31, 50))
    values[rng.random(values.shape) < 0.3] = np.nan
    values[:, 7] = np.nan
    observed = ~np.isnan(values).all(axis=0)
    np.testing.assert_allclose(feature_median(values)[observed], np.nanmedian(values[:, observed], axis=0))
    assert feature_median(values)[7] == 0.0
    expected = median_abs_deviation(values[:, observed], axis=0, nan_policy="omit")
    np.testing.assert_allclose(feature_mad(values)[observed], expected)


def test_missing_and_variance_filters_drop_the_right_features():
    values = np.array(
        [[1.0, 5.0, np.nan, 2.0], [2.0, 5.0, np.nan, 3.0], [3.0, 5.0, 1.0, np.nan], [4.0, 5.0, 2.0, 4.0]]
    )
    pre = Preprocessor("log_expression", max_missing_fraction=0.25, impute="none", scale="none").fit(_frame(values))
    counts = {step["step"]: (step["features_in"], step["features_out"]) for step in pre.steps_}
    # G2 misses 2 of 4 (> 0.25) and goes; G3 misses 1 of 4 and stays; G1 is constant and goes.
    assert counts["missing_filter"] == (4, 3)
    assert counts["variance_filter"] == (3, 2)
    assert list(pre.output_features_) == ["G0", "G3"]


@pytest.mark.parametrize("mode", ["shift", "split"])
def test_non_negativity(mode):
    rng = np.random.default_rng(9)
    raw = _frame(rng.normal(size=(20, 5)))
    out = Preprocessor("log_expression", non_negative=mode, impute="none").fit_transform(raw)
    assert (out.to_numpy() >= 0).all()
    scaled = Preprocessor("log_expression", impute="none").fit_transform(raw).to_numpy()
    if mode == "split":
        np.testing.assert_allclose(out.to_numpy()[:, :5] - out.to_numpy()[:, 5:], scaled, atol=1e-12)
        assert list(out.columns[:2]) == ["G0:pos", "G1:pos"] and out.columns[5] == "G0:neg"
    else:
        np.testing.assert_allclose(out.to_numpy(), scaled - scaled.min(axis=0), atol=1e-12)
        assert (out.min(axis=0) == 0).all()
