"""Properties of the fit: monotone objective, masks, projection, warm start, scaling, seeds."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.exceptions import ConvergenceWarning

from strataweave.factorize import JointNMF, partition_factor, updates

from conftest import knn_affinity, planted_views

pytestmark = pytest.mark.filterwarnings("ignore::sklearn.exceptions.ConvergenceWarning")


def _assert_non_increasing(trace):
    steps = np.diff(trace)
    assert np.all(steps <= 1e-12 * trace[0]), f"largest increase {steps.max():.3e}"


def test_objective_never_increases_with_graph_and_missing_modalities(cohort):
    # Monotonicity of the majorise-minimise updates (Cai et al. 2011, Lee & Seung 2001).
    views, _, affinity = cohort
    views = [v.copy() for v in views]
    views[0][:15] = np.nan
    views[2][40:60] = np.nan
    model = JointNMF(3, graph_weight=2.0, max_iter=150, tol=0, random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        model.fit(views, affinity)
    assert len(model.objective_) == 150
    _assert_non_increasing(model.objective_)
    assert model.objective_[-1] < 0.8 * model.objective_[0]


def test_objective_never_increases_with_entry_mask(cohort):
    views, _, affinity = cohort
    rng = np.random.default_rng(1)
    masks = [rng.random(v.shape) > 0.1 for v in views]
    model = JointNMF(3, graph_weight=1.0, max_iter=60, tol=0, init="random", random_state=2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        model.fit(views, affinity, mask=masks)
    _assert_non_increasing(model.objective_)


def test_masked_entries_have_no_influence(cohort):
    views, _, affinity = cohort
    rng = np.random.default_rng(5)
    masks = [rng.random(v.shape) > 0.2 for v in views]
    changed = [np.where(m, v, rng.random(v.shape) * 100) for v, m in zip(views, masks)]
    changed[1][~masks[1]] = np.nan
    fits = [JointNMF(3, graph_weight=0.5, max_iter=40, random_state=0).fit(v, affinity, mask=masks)
            for v in (views, changed)]
    np.testing.assert_array_equal(fits[0].patient_factor_, fits[1].patient_factor_)
    np.testing.assert_array_equal(fits[0].objective_, fits[1].objective_)


def test_missing_patient_rows_equal_a_per_patient_mask(cohort):
    views, _, affinity = cohort
    with_nan = [v.copy() for v in views]
    with_nan[1][:20] = np.nan
    present = np.ones(len(views[1]), dtype=bool)
    present[:20] = False
    by_nan = JointNMF(3, max_iter=40, random_state=0).fit(with_nan, affinity)
    by_mask = JointNMF(3, max_iter=40, random_state=0).fit(views, affinity, mask=[None, present, None])
    np.testing.assert_allclose(by_nan.patient_factor_, by_mask.patient_factor_, rtol=1e-10)


def test_transform_of_training_patients_gives_back_w():
    # Without a graph the fitted W is (near) the non-negative least-squares W for the fitted H.
    views, _ = planted_views(n_patients=80, seed=6)
    views[2][:10] = np.nan
    model = JointNMF(3, graph_weight=0.0, max_iter=3000, tol=1e-10, random_state=0, dtype="float64").fit(views)
    W = model.transform(views)
    assert np.linalg.norm(W - model.patient_factor_) <= 1e-3 * np.linalg.norm(model.patient_factor_)


def test_warm_start_from_a_fit_converges_at_once(cohort):
    views, _, affinity = cohort
    first = JointNMF(3, graph_weight=0.5, max_iter=300, tol=1e-6, random_state=0).fit(views, affinity)
    again = JointNMF(3, graph_weight=0.5, max_iter=300, tol=1e-6).fit(
        views, affinity, W_init=first.patient_factor_, H_init=first.components_)
    assert again.n_iter_ <= 10
    assert again.objective_[-1] <= first.objective_[-1] * (1 + 1e-6)
    # Given only the loadings, W is projected (graph included): the fit starts where the first ended.
    from_loadings = JointNMF(3, graph_weight=0.5, max_iter=5, tol=0).fit(views, affinity, H_init=first.components_)
    assert from_loadings.objective_[0] <= first.objective_[-1] * (1 + 1e-6)


def test_graph_weight_means_the_same_at_any_data_scale(cohort):
    # alpha_v = 1/||X_v||^2 and the relative graph weight make the fit free of the data's units.
    views, _, affinity = cohort
    # Identities checked to float64 precision, so the fits run in float64 (the default is float32).
    fits = [JointNMF(3, graph_weight=1.0, max_iter=50, random_state=0, dtype="float64").fit([v * c for v in views], affinity)
            for c in (1.0, 1000.0)]
    np.testing.assert_allclose(fits[0].objective_, fits[1].objective_, rtol=1e-8)
    np.testing.assert_allclose(fits[0].patient_factor_, fits[1].patient_factor_, rtol=1e-7, atol=1e-12)


def test_loadings_are_normalised(cohort):
    views, _, affinity = cohort
    model = JointNMF(3, graph_weight=1.0, max_iter=30, random_state=0, dtype="float64").fit(views, affinity)
    norms = sum(a * np.sum(H**2, axis=1) for a, H in zip(model.modality_weights_, model.components_))
    np.testing.assert_allclose(norms, 1.0, rtol=1e-12)
    assert model.effective_graph_weight_ == pytest.approx(120 / affinity.sum())


def test_graph_makes_neighbours_more_alike(cohort):
    views, _, affinity = cohort
    rough = [JointNMF(3, graph_weight=w, max_iter=100, random_state=0).fit(views, affinity) for w in (0.0, 5.0)]
    from strataweave.factorize.smoothness import GraphSmoothness

    penalty = GraphSmoothness(affinity, 1.0, 120)
    roughness = [penalty.per_component(m.patient_factor_).sum() / np.sum(m.patient_factor_**2) for m in rough]
    assert roughness[1] < 0.8 * roughness[0]


def test_restarts_keep_the_lowest_objective(cohort):
    views, _, affinity = cohort
    kwargs = dict(graph_weight=0.5, max_iter=30, init="random", random_state=3)
    best = JointNMF(3, n_restarts=3, **kwargs).fit(views, affinity)
    single = JointNMF(3, n_restarts=1, **kwargs).fit(views, affinity)
    assert best.objective_[-1] <= single.objective_[-1]
    repeat = JointNMF(3, n_restarts=3, **kwargs).fit(views, affinity)
    np.testing.assert_array_equal(best.patient_factor_, repeat.patient_factor_)


def test_max_iter_ends_with_a_warning(cohort):
    views, _, affinity = cohort
    with pytest.warns(ConvergenceWarning, match="max_iter=3"):
        model = JointNMF(3, max_iter=3, tol=0, random_state=0).fit(views, affinity)
    assert model.n_iter_ == 3


def test_float32_fit_is_close_to_float64(cohort):
    views, _, affinity = cohort
    fits = {d: JointNMF(3, graph_weight=0.5, max_iter=40, tol=0, dtype=d, random_state=0) for d in ("float32", "float64")}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        W = {d: m.fit_transform(views, affinity) for d, m in fits.items()}
    assert W["float32"].dtype == np.float32
    assert np.linalg.norm(W["float32"] - W["float64"]) < 1e-3 * np.linalg.norm(W["float64"])


@pytest.mark.parametrize("scale", [1e-20, 1e-35])
def test_a_component_started_near_zero_dies_out_in_float32_instead_of_turning_to_nan(scale):
    # Its denominators underflow before its numerators do; with only a floor at the smallest
    # float the ratio overflowed and every factor became NaN.
    rng = np.random.default_rng(0)
    X = rng.gamma(2.0, 1.0, (120, 30))
    W_init = rng.uniform(0.5, 1.5, (120, 4))
    W_init[:, 3] = scale
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        fits = {dtype: JointNMF(4, dtype=dtype, max_iter=50, random_state=0).fit([X], W_init=W_init)
                for dtype in ("float32", "float64")}
    assert all(np.isfinite(fit.patient_factor_).all() for fit in fits.values())
    # the float64 fit from the same start as the reference: as good a fit, within 5 %
    assert fits["float32"].reconstruction_error_[0] <= 1.05 * fits["float64"].reconstruction_error_[0]


def test_reconstruction_error_is_relative_frobenius(cohort):
    views, _, affinity = cohort
    model = JointNMF(3, max_iter=50, random_state=0, dtype="float64").fit(views, affinity)
    direct = [np.linalg.norm(X - model.patient_factor_ @ H) / np.linalg.norm(X) for X, H in zip(views, model.components_)]
    np.testing.assert_allclose(model.reconstruction_error_, direct, rtol=1e-8)


@pytest.mark.parametrize("seed", range(4))
def test_objective_never_increases_on_random_weighted_graphs(seed):
    # The majoriser 2D >= D - A holds for any non-negative symmetric A (D + A is PSD), so a
    # random dense-ish weighted graph and a strong weight must still give a monotone trace.
    import scipy.sparse as sp

    rng = np.random.default_rng(seed)
    views, _ = planted_views(n_patients=40, features=(15, 12), seed=seed)
    views[1][rng.random(40) < 0.3] = np.nan
    upper = sp.random(40, 40, density=0.3, random_state=seed, format="csr")
    affinity = sp.triu(upper, 1) + sp.triu(upper, 1).T
    model = JointNMF(3, graph_weight=10.0 ** rng.uniform(-1, 2), max_iter=60, tol=0, init="random", random_state=seed)
    model.fit(views, affinity)
    _assert_non_increasing(model.objective_)


def test_default_modality_weights_are_the_balance_the_model_fits_with(cohort):
    from strataweave.factorize.views import default_modality_weights

    views, _, graph = cohort
    model = JointNMF(3, max_iter=5, random_state=0).fit(views, graph)
    assert np.allclose(default_modality_weights(views), model.modality_weights_, rtol=1e-12)
    # the formula of the issue: alpha_v = 1 / ||X_v||_F^2 over the observed entries
    expected = [1.0 / np.nansum(np.asarray(v, dtype=float) ** 2) for v in views]
    assert np.allclose(default_modality_weights(views), expected, rtol=1e-12)


def test_float32_stays_float32_in_every_step(cohort, monkeypatch):
    # dtype="float32" must not be upcast by any internal step (only the scalar objective is
    # accumulated in float64): spy on the products and both inner updates.
    from strataweave.factorize import updates

    views, _, affinity = cohort
    views = [v.copy() for v in views]
    views[1][:10] = np.nan
    seen = []
    for owner, name in ((updates, "data_times_loadings"), (updates.PatientStep, "run"), (updates.LoadingStep, "run")):
        original = getattr(owner, name)

        def spy(*args, _original=original, **kwargs):
            result = _original(*args, **kwargs)
            parts = result if isinstance(result, (list, tuple)) else [result]
            seen.extend(a.dtype for a in parts if isinstance(a, np.ndarray))
            return result

        monkeypatch.setattr(owner, name, spy)
    model = JointNMF(3, graph_weight=1.0, max_iter=20, dtype="float32", random_state=0).fit(views, affinity)
    assert seen and set(seen) == {np.dtype(np.float32)}
    assert model.patient_factor_.dtype == np.float32
    assert all(H.dtype == np.float32 for H in model.components_)


def test_stopping_rule_measures_decreases_against_the_data_scale(cohort, monkeypatch):
    # Converged = 3 decreases in a row below tol x sum_v alpha_v ||X_v||^2 (the zero model's
    # objective, = number of views with the default weights), with or without the graph.
    # The label rule is switched off here to see the objective rule alone.
    monkeypatch.setattr(updates, "LABEL_PATIENCE", 10**9)
    views, _, affinity = cohort
    for weight in (0.0, 1.0, 5.0):
        model = JointNMF(3, graph_weight=weight, tol=1e-4, random_state=0).fit(views, affinity)
        steps = -np.diff(model.objective_)
        assert model.n_iter_ < 300
        assert np.all(steps[-3:] < 1e-4 * len(views))
        assert not np.all(steps[-4:-1] < 1e-4 * len(views))


def test_fits_with_the_graph_converge_on_every_cohort_size():
    # The same rule at every size: fits with the graph term end by the tolerance, not max_iter.
    with warnings.catch_warnings():
        warnings.simplefilter("error", ConvergenceWarning)
        for n_patients in (40, 150, 600):
            views, _ = planted_views(n_patients=n_patients, noise=0.05, seed=n_patients)
            JointNMF(4, graph_weight=1.0, n_restarts=2, random_state=0).fit(views, knn_affinity(views))


@pytest.mark.parametrize("label_rule", [True, False])
def test_graph_regularised_fit_converges_before_max_iter(cohort, monkeypatch, label_rule):
    # With the graph term and the default tol, the fit ends by a tolerance, not by max_iter,
    # with the label rule and by the objective rule alone.
    if not label_rule:
        monkeypatch.setattr(updates, "LABEL_PATIENCE", 10**9)
    views, _, affinity = cohort
    with warnings.catch_warnings():
        warnings.simplefilter("error", ConvergenceWarning)
        model = JointNMF(3, graph_weight=1.0, random_state=0).fit(views, affinity)
    assert model.n_iter_ < model.max_iter


def test_settled_labels_stop_the_fit_before_the_objective_rule(monkeypatch):
    # Started from the planted partition, the argmax labels never change while the objective
    # still creeps down: the label rule ends the fit early (9 against 148 iterations when
    # written), with the labels the objective rule ends with and an objective within 1 %.
    views, groups = planted_views(n_patients=150, noise=1.0, seed=4)
    affinity = knn_affinity(views)

    def fit():
        return JointNMF(3, graph_weight=1.0, tol=1e-6, random_state=0).fit(
            views, affinity, W_init=partition_factor(groups, 3))

    by_labels = fit()
    monkeypatch.setattr(updates, "LABEL_PATIENCE", 10**9)
    by_objective = fit()
    assert by_labels.n_iter_ < by_objective.n_iter_ / 2 and by_objective.n_iter_ < by_objective.max_iter
    np.testing.assert_array_equal(by_labels.patient_factor_.argmax(axis=1), by_objective.patient_factor_.argmax(axis=1))
    assert by_labels.objective_[-1] == pytest.approx(by_objective.objective_[-1], rel=1e-2)


def test_labels_with_an_empty_component_do_not_stop_the_fit(monkeypatch):
    # Every patient in one argmax component (it carries the profile common to all): such
    # labels never count as settled, so the fit ends where the objective rule alone ends it,
    # later than the label rule could have.
    views, _ = planted_views(n_patients=120, seed=5)
    start = np.tile([1.0, 0.1, 0.1], (120, 1))

    def fit():
        # tol = 1e-8 lies below float32's resolution of the objective, hence float64
        return JointNMF(3, graph_weight=0.0, tol=1e-8, dtype="float64").fit(views, W_init=start)

    with_rule, earliest = fit(), updates.LABEL_PATIENCE + 1
    assert np.bincount(with_rule.patient_factor_.argmax(axis=1), minlength=3).tolist() == [120, 0, 0]
    monkeypatch.setattr(updates, "LABEL_PATIENCE", 10**9)
    assert with_rule.n_iter_ == fit().n_iter_ > earliest
