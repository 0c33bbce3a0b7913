"""The prepare stage's PreparedCohort read back from the stage cache equals the one computed."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd

from strataweave.workflow.cache import StageCache
from strataweave.workflow.config import load_workflow
from strataweave.workflow.stages import PreparedCohort, load_inputs, prepare_cohort
from workflow_files import write_synthetic_inputs


def test_a_cached_prepared_cohort_equals_the_fresh_one(tmp_path) -> None:
    flow = load_workflow(write_synthetic_inputs(tmp_path / "inputs", ("rna", "protein")))
    loaded = load_inputs(flow)
    fresh = prepare_cohort(flow, loaded)
    cache = StageCache(tmp_path / "stages")
    cache.save("prepare", "k" * 64, fresh)
    back = cache.load("prepare", "k" * 64, PreparedCohort)
    pd.testing.assert_index_equal(back.patients, fresh.patients)  # pandas' own helpers are the reference
    pd.testing.assert_frame_equal(back.presence, fresh.presence)
    pd.testing.assert_frame_equal(back.unmatched, fresh.unmatched)
    for a, b in zip([*fresh.views.values(), *fresh.aligned_views, *fresh.normalised_views.values()],
                    [*back.views.values(), *back.aligned_views, *back.normalised_views.values()]):
        pd.testing.assert_frame_equal(b, a)
    assert (back.qc, back.dropped) == (fresh.qc, fresh.dropped)
    for name, preprocessor in fresh.preprocessors.items():
        raw = loaded["raw"][name]
        pd.testing.assert_frame_equal(back.preprocessors[name].transform(raw), preprocessor.transform(raw))
        (state, arrays), (state_back, arrays_back) = preprocessor.to_state(), back.preprocessors[name].to_state()
        assert json.dumps(state_back) == json.dumps(state)  # what model/model.json holds, key order included
        assert arrays_back.keys() == arrays.keys()
        for key, values in arrays.items():
            np.testing.assert_array_equal(arrays_back[key], values)  # NaN where NaN
