"""SubtypeModel: placing new patients with a modality missing, the far-from-every-subtype flag,
and a save / load round trip that places them the same way."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import strataweave as sw
from strataweave.data.synthetic import make_synthetic_cohort


@pytest.fixture(scope="module")
def fitted():
    made = make_synthetic_cohort(n_patients=90, n_subtypes=3, seed=4)
    def patients_in_rows(name):
        table = made.tables[name]
        return table.T if made.orientations[name] == "features_in_rows" else table

    raw = {name: (patients_in_rows(name), made.kinds[name]) for name in ("rna", "protein")}
    cohort = sw.cohort_from_tables(made.clinical, raw, impute="median", top_features=200)
    graph = sw.GraphFusion(n_neighbours=10).fit(cohort)
    sweep = sw.SubtypeSweep(counts=[2, 3], n_resamples=2, random_state=3).fit(cohort, graph)
    return cohort, sweep


def test_a_patient_missing_a_modality_is_placed_from_the_other_with_less_confidence(fitted):
    cohort, sweep = fitted
    model = sweep.model(3)
    both = {name: cohort.modality(name).raw for name in ("rna", "protein")}
    full = model.predict(both)
    rna_only = model.predict({"rna": both["rna"]})
    assert set(rna_only["modalities_used"]) == {"rna"}
    # confidence = best minus second-best score, times the share of modality weight measured (1 of 2)
    scores = np.sort(rna_only.filter(like="score_").to_numpy(), axis=1)
    np.testing.assert_allclose(rna_only["confidence"], (scores[:, -1] - scores[:, -2]) * 0.5)
    both_measured = full[full["modalities_used"] == "rna,protein"]
    scores = np.sort(both_measured.filter(like="score_").to_numpy(), axis=1)
    np.testing.assert_allclose(both_measured["confidence"], scores[:, -1] - scores[:, -2])
    trained = model.labels_.loc[full.index]
    assert (full["subtype"] == trained).mean() > 0.9


def test_a_patient_unlike_every_subtype_is_flagged_far(fitted):
    cohort, sweep = fitted
    model = sweep.model(3)
    raw = cohort.modality("protein").raw
    # every protein far above the cohort's highest level: a profile no subtype has
    odd = pd.DataFrame([raw.max() * scale for scale in (50, 100, 200)], index=["odd-1", "odd-2", "odd-3"])
    placed = model.predict({"protein": pd.concat([raw.iloc[:20], odd])})
    assert placed.loc[raw.index[:20], "far_from_subtypes"].mean() < 0.2
    assert placed.loc[["odd-1", "odd-2", "odd-3"], "far_from_subtypes"].all()


def test_a_saved_model_loads_and_places_patients_the_same_way(fitted, tmp_path):
    cohort, sweep = fitted
    model = sweep.model()
    views = {"rna": cohort.modality("rna").raw}
    loaded = sw.SubtypeModel.load(model.save(tmp_path / "model"))
    pd.testing.assert_frame_equal(loaded.predict(views), model.predict(views))
    assert loaded.names_ == model.names_ and "Research use only" in (tmp_path / "model" / "model.json").read_text()


def test_an_unknown_modality_is_bad_input_naming_it(fitted):
    _, sweep = fitted
    with pytest.raises(sw.InputError, match="'mirna'"):
        sweep.model().predict({"mirna": pd.DataFrame()})
