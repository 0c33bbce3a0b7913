"""label_patients: k-means on unit-length rows of W (checked against scikit-learn), argmax, margins."""

from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.cluster import KMeans
from sklearn.metrics import adjusted_rand_score

from strataweave.factorize import JointNMF, label_patients



def test_kmeans_labels_agree_with_sklearn_on_normalised_rows():
    # Reference: scikit-learn KMeans on the L2-normalised rows (sklearn.preprocessing.normalize).
    from sklearn.preprocessing import normalize

    W = np.random.default_rng(0).gamma(1.0, 1.0, (90, 4))
    labels, confidence, scores = label_patients(W, 3, random_state=0)
    reference = KMeans(3, n_init=10, random_state=0).fit_predict(normalize(W))
    assert adjusted_rand_score(labels, reference) == 1.0
    assert np.all(np.bincount(labels)[:-1] >= np.bincount(labels)[1:])  # numbered largest first
    assert np.array_equal(labels, scores.argmax(axis=1))
    top_two = np.sort(scores, axis=1)[:, ::-1][:, :2]
    np.testing.assert_allclose(confidence, top_two[:, 0] - top_two[:, 1])
    assert np.all((confidence >= 0) & (confidence <= 1))


def test_argmax_option_uses_row_shares():
    W = np.array([[3.0, 1.0, 0.0], [0.0, 0.0, 2.0], [1.0, 1.0, 2.0], [0.0, 4.0, 1.0]])
    labels, confidence, scores = label_patients(W, 3, method="argmax")
    np.testing.assert_allclose(scores.sum(axis=1), 1.0)
    # Largest group first: component 2 holds two patients, so it becomes subtype 0.
    assert labels.tolist() == [1, 0, 0, 2]
    np.testing.assert_allclose(confidence, [0.5, 1.0, 0.25, 0.6])


def test_dataframe_in_gives_pandas_out():
    W = pd.DataFrame(np.random.default_rng(1).random((12, 3)), index=[f"P{i}" for i in range(12)])
    labels, confidence, scores = label_patients(W, 2, random_state=0)
    assert labels.index.equals(W.index) and confidence.index.equals(W.index)
    assert list(scores.columns) == ["score_0", "score_1"]


def test_fitted_factor_recovers_planted_groups(cohort):
    views, groups, affinity = cohort
    W = JointNMF(3, graph_weight=0.5, max_iter=200, random_state=0).fit_transform(views, affinity)
    labels, _, _ = label_patients(W, 3, random_state=0)
    assert adjusted_rand_score(groups, labels) > 0.9
