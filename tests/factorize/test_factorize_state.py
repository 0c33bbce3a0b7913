"""Saving a fitted JointNMF as JSON + npz (no pickle) and loading it back."""

from __future__ import annotations

import io
import json

import numpy as np
import pytest
import pandas as pd

from strataweave.factorize import JointNMF

from conftest import planted_views

pytestmark = pytest.mark.filterwarnings("ignore::sklearn.exceptions.ConvergenceWarning")


def test_round_trip_through_json_and_npz(tmp_path):
    views, _ = planted_views(n_patients=50, seed=8)
    frames = [pd.DataFrame(v, columns=[f"g{j}" for j in range(v.shape[1])]) for v in views]
    model = JointNMF(3, graph_weight=0.0, max_iter=60, random_state=4, dtype="float32").fit(frames)
    state, arrays = model.to_state()
    text = json.dumps(state)
    buffer = io.BytesIO()
    np.savez(buffer, **arrays)
    buffer.seek(0)
    with np.load(buffer, allow_pickle=False) as loaded:
        restored = JointNMF.from_state(json.loads(text), dict(loaded))
    assert restored.get_params() == model.get_params()
    for H, H_restored in zip(model.components_, restored.components_):
        np.testing.assert_array_equal(H, H_restored)
    new = [f.iloc[:10, ::-1] for f in frames]  # columns in another order are put back by name
    np.testing.assert_array_equal(restored.transform(new), model.transform(new))
    np.testing.assert_array_equal(restored.objective_, model.objective_)
