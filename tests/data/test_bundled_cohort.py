"""The data layer on the bundled synthetic cohort files: read, detect orientation, align, prepare, QC."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from strataweave.data import Cohort, prepare_modality, presence_patterns, qc_summary, read_clinical, read_matrix
from strataweave.data.synthetic import make_synthetic_cohort

FOLDER = Path(__file__).resolve().parents[2] / "synthetic_cohort"
LAYERS = {  # name: (file, kind)
    "rna": ("rna_counts.tsv.gz", "counts"),
    "methylation": ("methylation_beta.tsv.gz", "beta"),
    "mirna": ("mirna_counts.tsv", "counts"),
    "protein": ("protein_abundance.tsv", "abundance"),
}


@pytest.fixture(scope="module")
def loaded():
    clinical = read_clinical(FOLDER / "clinical.tsv", "patient_id")
    raw = {
        name: read_matrix(FOLDER / file, known_ids=clinical.index, name=name, kind=kind)
        for name, (file, kind) in LAYERS.items()
    }
    return clinical, raw


def test_files_read_back_as_the_generator_made_them(loaded):
    # Cross-check of reader against generator: orientation detection must undo each file's
    # orientation, and values must match up to the rounding the files were written with.
    clinical, raw = loaded
    generated = make_synthetic_cohort()
    pd.testing.assert_index_equal(clinical.index, generated.clinical.index, check_names=False)
    for name, frame in raw.items():
        expected = generated.patients_by_features(name)
        assert frame.shape == expected.shape, name
        aligned = frame.loc[expected.index, expected.columns].to_numpy()
        np.testing.assert_allclose(aligned, expected.to_numpy(), rtol=1e-4, atol=1e-4, err_msg=name)


def test_cohort_presence_and_qc_on_bundled_files(loaded):
    clinical, raw = loaded
    modalities = [
        prepare_modality(name, LAYERS[name][1], frame, source=LAYERS[name][0], patients=clinical.index, top_features=100)
        for name, frame in raw.items()
    ]
    cohort = Cohort(clinical, modalities)
    assert cohort.unmatched.empty
    presence = cohort.presence
    # README of the cohort: 60 of 400 patients (15 %) miss exactly one layer.
    assert len(cohort.patients) == len(clinical)
    assert (presence.sum(axis=1) < presence.shape[1]).mean() == pytest.approx(0.15, abs=0.03)
    qc = qc_summary(cohort)
    assert list(qc.index) == list(LAYERS)
    assert (qc["features_used"] == 100).all()
    assert (qc["features_input"] >= qc["after_missing_filter"]).all()
    assert 0 < qc.loc["protein", "missing_fraction"] < 0.1
    assert presence_patterns(cohort)["patients"].sum() == len(cohort.patients)
    views = cohort.aligned_views()
    for view, name in zip(views, LAYERS):
        assert view.notna().all(axis=1).sum() == presence[name].sum()
