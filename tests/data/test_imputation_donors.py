"""The k-nearest-neighbour fill draws its donors from at most MAX_DONORS patients."""

import numpy as np
import pandas as pd
from sklearn.impute import KNNImputer

from strataweave.data import Preprocessor, imputation


def test_every_patient_donates_in_a_small_modality_and_an_even_sample_in_a_large_one():
    np.testing.assert_array_equal(imputation.donor_rows(imputation.MAX_DONORS), np.arange(imputation.MAX_DONORS))
    large = imputation.donor_rows(3 * imputation.MAX_DONORS + 7)
    assert large.size == imputation.MAX_DONORS and large[0] == 0 and large[-1] == 3 * imputation.MAX_DONORS + 6
    assert np.all(np.diff(large) >= 2)


def test_the_fill_above_the_cap_matches_scikit_learn_on_the_sampled_donors(monkeypatch):
    monkeypatch.setattr(imputation, "MAX_DONORS", 40)
    rng = np.random.default_rng(2)
    values = rng.lognormal(3.0, 0.5, (100, 12))
    values[rng.random(values.shape) < 0.05] = np.nan
    raw = pd.DataFrame(values, index=[f"BNC-{i:03d}" for i in range(100)], columns=[f"QZP{j:02d}" for j in range(12)])
    filled = Preprocessor("abundance", impute="knn", scale="none").fit_transform(raw)
    # reference: scikit-learn's KNNImputer fitted on the 40 evenly spaced donor rows only (log2 scale)
    logged = np.log2(values)
    expected = KNNImputer(n_neighbors=10).fit(logged[imputation.donor_rows(100)]).transform(logged)
    np.testing.assert_allclose(filled.to_numpy(), expected, rtol=1e-12)
