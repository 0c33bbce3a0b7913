"""Every estimator of the Python door follows scikit-learn: clone, get_params / set_params, the
estimator checks (on JointNMF), and defaults that equal those of the numeric layer they wrap."""

from __future__ import annotations

import inspect
import warnings

import pytest
from sklearn.base import clone
from sklearn.utils import TransformerTags
from sklearn.utils.estimator_checks import check_estimator

import strataweave as sw
from strataweave.graph import fuse_modalities
from strataweave.subtypes.parallel import ParallelSettings
from strataweave.subtypes.settings import SweepSettings

ESTIMATORS = [sw.GraphFusion, sw.JointNMF, sw.SubtypeSweep, sw.SurvivalComparison, sw.ClinicalAssociation,
              sw.MarkerSearch, sw.GeneSetEnrichment]

#: checks JointNMF is not held to, and why
NOT_APPLICABLE = {
    "check_n_features_in": "multi-view input: features are counted per view (feature_names_), not in n_features_in_",
    "check_n_features_in_after_fitting": "multi-view input: features are counted per view, not in n_features_in_",
    "check_positive_only_tag_during_fit": "negative input is refused with strataweave's InputError wording naming the view",
    "check_complex_data": "complex input is refused by the rank check's InputError, not sklearn's phrase",
    "check_dtype_object": "text cells are refused with an InputError naming the view (object arrays of numbers are not read)",
    "check_estimators_empty_data_messages": "empty input is refused with strataweave's InputError wording",
    "check_estimator_sparse_tag": "views are dense (all-NaN rows mark a missing modality); sparse input is refused in own words",
    "check_estimator_sparse_array": "views are dense; sparse input is refused in strataweave's own words",
    "check_estimator_sparse_matrix": "views are dense; sparse input is refused in strataweave's own words",
    "check_transformer_data_not_an_array": "views are arrays, DataFrames, or a list or dict of them, not array-likes",
    "check_fit2d_1sample": "one patient is refused by the rank bound's InputError, not sklearn's phrase",
    "check_fit2d_predict1d": "a 1-D input is refused with strataweave's InputError wording",
}


class CheckedJointNMF(sw.JointNMF):
    """JointNMF as the checks call it: `fit(X, y)` where JointNMF's second argument is the patient
    graph (sklearn's y has no meaning here and is dropped), tagged as a non-negative transformer."""

    def fit(self, X, y=None, mask=None, **starts):
        return super().fit(X, None, mask, **starts)

    def fit_transform(self, X, y=None, mask=None, **starts):
        return super().fit_transform(X, None, mask, **starts)

    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        tags.transformer_tags = TransformerTags(preserves_dtype=[self.dtype])  # output in the model's dtype
        tags.input_tags.positive_only = True
        return tags


def test_joint_nmf_passes_the_estimator_checks_that_apply():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        results = check_estimator(CheckedJointNMF(n_components=2, max_iter=50), on_fail=None,
                                  expected_failed_checks=NOT_APPLICABLE)
    failed = [(r["check_name"], str(r["exception"])[:120]) for r in results if r["status"] == "failed"]
    assert failed == []
    assert sum(r["status"] == "passed" for r in results) >= 30


@pytest.mark.parametrize("estimator", ESTIMATORS, ids=lambda cls: cls.__name__)
def test_every_estimator_clones_and_round_trips_its_parameters(estimator):
    original = estimator()
    params = original.get_params()
    copy = clone(original)
    assert copy is not original and copy.get_params() == params
    name = next(iter(params))
    copy.set_params(**{name: params[name]})
    assert copy.get_params() == params
    with pytest.raises(ValueError):
        copy.set_params(no_such_parameter=1)


def _defaults(function) -> dict:
    return {n: p.default for n, p in inspect.signature(function).parameters.items() if p.default is not p.empty}


def test_defaults_equal_those_of_the_numeric_layers():
    fusion = _defaults(fuse_modalities)
    for name, value in sw.GraphFusion().get_params().items():
        assert fusion[name] == value, name
    sweep = sw.SubtypeSweep().get_params()
    settings, factorization = SweepSettings(), _defaults(sw.JointNMF)
    for name in ("n_resamples", "fraction", "feature_fraction", "pac_tolerance", "min_size", "core_threshold",
                 "resample_restarts", "warm_start", "start_from", "labels_from"):
        assert getattr(settings, name) == sweep[name], name
    assert tuple(sweep["pac_window"]) == settings.pac_window
    for name in ("graph_weight", "max_iter", "tol", "init", "n_restarts"):
        assert factorization[name] == sweep[name], name
    assert (sweep["backend"], sweep["n_jobs"]) == (ParallelSettings().backend, ParallelSettings().n_jobs)
