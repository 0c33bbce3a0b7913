"""SweepResult.to_state / from_state: the sweep stage's cache entry, JSON plus npz without pickle."""

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cohort import prepared_cohort
from strataweave.files import read_checked, write_checked
from strataweave.subtypes.result import CODEC_FIELDS, SweepResult
from strataweave.subtypes.settings import SweepSettings
from strataweave.subtypes.sweep import sweep_subtype_counts


@pytest.fixture(scope="module")
def result():
    cohort = prepared_cohort(n_patients=60, n_subtypes=2, seed=5, top_features=30)
    settings = SweepSettings(n_resamples=3, min_size=5)
    return sweep_subtype_counts(cohort.views, cohort.graph, [2, 3], settings=settings,
                                factorization={"max_iter": 40, "init": "random"}, random_state=2)


def _through_files(result: SweepResult, folder: Path) -> SweepResult:
    """The sweep written as the stage cache writes it (JSON plus npz read without pickle) and rebuilt."""
    state, arrays = result.to_state()
    json.dumps(state, allow_nan=False)  # strict JSON: no NaN left in the state
    write_checked(folder / "sweep.json", folder / "sweep.npz", state, arrays)
    return SweepResult.from_state(*read_checked(folder / "sweep.json", folder / "sweep.npz"))


def test_a_rebuilt_sweep_equals_the_original(result, tmp_path):
    back = _through_files(result, tmp_path)
    assert back.to_dict() == result.to_dict()
    assert back.counts == result.counts and back.settings == result.settings
    assert back.recommendation == result.recommendation and back.unconverged == result.unconverged
    for name in CODEC_FIELDS:
        original, rebuilt = getattr(result, name), getattr(back, name)
        for k in original if isinstance(original, dict) else [None]:
            a, b = (original, rebuilt) if k is None else (original[k], rebuilt[k])
            if isinstance(a, pd.DataFrame):
                pd.testing.assert_frame_equal(b, a)  # pandas' own helper is the reference for "equal frame"
            elif isinstance(a, pd.Index):
                pd.testing.assert_index_equal(b, a)
            else:
                np.testing.assert_array_equal(b, a)
                assert b.dtype == a.dtype


def test_rebuilt_models_place_patients_exactly_like_the_fitted_ones(result, tmp_path):
    back = _through_files(result, tmp_path)
    views = [np.abs(np.random.default_rng(0).normal(size=(5, H.shape[1]))) for H in result.models[2].components_]
    for k, model in result.models.items():
        np.testing.assert_array_equal(back.models[k].patient_factor_, model.patient_factor_)
        np.testing.assert_array_equal(back.models[k].transform(views), model.transform(views))
