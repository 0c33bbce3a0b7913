"""Bad input to JointNMF and label_patients raises one clear InputError."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp

from strataweave import InputError
from strataweave.factorize import JointNMF, label_patients

from conftest import knn_affinity, planted_views

pytestmark = pytest.mark.filterwarnings("ignore::sklearn.exceptions.ConvergenceWarning")


@pytest.fixture
def small():
    views, _ = planted_views(n_patients=30, features=(12, 10), seed=2)
    return views, knn_affinity(views, 4)


def _fit(views, graph=None, **kwargs):
    return JointNMF(kwargs.pop("n_components", 2), max_iter=5, **kwargs).fit(views, graph)


def test_negative_values_name_the_view_and_count(small):
    views, graph = small
    views = [views[0], views[1] - 0.5]
    negative = int(np.sum(views[1] < 0))
    with pytest.raises(InputError, match=rf"view 'view 1': found {negative} negative entries.*Preprocessor"):
        _fit(views, graph)


def test_nan_without_mask_names_the_patient(small):
    views, graph = small
    frames = [pd.DataFrame(v, index=[f"P{i:02d}" for i in range(30)]) for v in views]
    frames[0].iloc[4, 3] = np.nan
    with pytest.raises(InputError, match=r"view 'view 0', patient 'P04': found 1 NaN of 12 values"):
        _fit(frames, graph)


def test_nan_where_mask_says_observed(small):
    views, graph = small
    views = [views[0].copy(), views[1]]
    views[0][2, 2] = np.nan
    with pytest.raises(InputError, match="NaN where the mask says observed"):
        JointNMF(2, max_iter=5).fit(views, graph, mask=[np.ones((30, 12), dtype=bool), None])


@pytest.mark.parametrize("rank, expected", [(30, "1 <= rank <= 22"), (0, "an integer >= 1")])
def test_rank_must_be_below_the_patient_count(small, rank, expected):
    views, graph = small
    with pytest.raises(InputError, match=rf"n_components: found {rank}; expected {expected}"):
        _fit(views, graph, n_components=rank)


def test_rank_may_exceed_the_narrowest_view(small):
    views, graph = small
    narrow = [views[0][:, :3], views[1]]  # 3 features, rank 5
    model = JointNMF(5, max_iter=40).fit(narrow, graph)
    assert model.components_[0].shape == (5, 3)
    assert model.objective_[-1] < model.objective_[0]


def test_graph_size_must_match_patients(small):
    views, _ = small
    with pytest.raises(InputError, match=r"graph: found shape \(29, 29\); expected \(30, 30\)"):
        _fit(views, sp.identity(29, format="csr"))


def test_graph_must_be_symmetric(small):
    views, _ = small
    with pytest.raises(InputError, match="asymmetric"):
        _fit(views, sp.random(30, 30, density=0.2, random_state=0, format="csr"))


def test_patient_without_any_data(small):
    views, graph = small
    views = [v.copy() for v in views]
    views[0][7] = np.nan
    views[1][7] = np.nan
    with pytest.raises(InputError, match=r"row 7: found no data in any view \(1 such patients\)"):
        _fit(views, graph)


def test_views_must_share_patient_rows(small):
    views, graph = small
    with pytest.raises(InputError, match="found 20 patient rows; expected 30"):
        _fit([views[0], views[1][:20]], graph)


def test_dataframe_indices_must_agree(small):
    views, graph = small
    frames = [pd.DataFrame(views[0], index=[f"P{i}" for i in range(30)]),
              pd.DataFrame(views[1], index=[f"Q{i}" for i in range(30)])]
    with pytest.raises(InputError, match="patient index differs"):
        _fit(frames, graph)


def test_unknown_init_and_bad_iterations(small):
    views, graph = small
    with pytest.raises(InputError, match="init: found 'svd'"):
        _fit(views, graph, init="svd")
    with pytest.raises(InputError, match="max_iter: found 0"):
        JointNMF(2, max_iter=0).fit(views, graph)


def test_transform_needs_the_training_features(small):
    views, graph = small
    model = _fit(views, graph)
    with pytest.raises(InputError, match="found 11 features; expected 12"):
        model.transform([views[0][:, :11], views[1]])
    with pytest.raises(InputError, match="not fitted"):
        JointNMF(2).transform(views)


def test_label_patients_rejects_bad_requests():
    W = np.random.default_rng(0).random((20, 3))
    with pytest.raises(InputError, match="n_subtypes: found 1"):
        label_patients(W, 1)
    with pytest.raises(InputError, match="expected 3, the rank of W"):
        label_patients(W, 2, method="argmax")
    with pytest.raises(InputError, match="method: found 'nearest'"):
        label_patients(W, 2, method="nearest")


def test_patient_graph_must_match_the_view_patients(small):
    from strataweave.graph import PatientGraph

    views, graph = small
    ids = [f"P{i:02d}" for i in range(30)]
    frames = [pd.DataFrame(v, index=ids) for v in views]
    shuffled = PatientGraph(patients=pd.Index(ids[::-1]), affinity=graph, rule="intersection")
    with pytest.raises(InputError, match="patients differ"):
        _fit(frames, shuffled)
    aligned = PatientGraph(patients=pd.Index(ids), affinity=graph, rule="intersection")
    np.testing.assert_array_equal(_fit(frames, aligned, random_state=0).patient_factor_,
                                  _fit(frames, graph, random_state=0).patient_factor_)
