"""Cohort alignment, presence, unmatched patients and the QC tables."""

import numpy as np
import pandas as pd
import pytest

from strataweave import InputError
from strataweave.data import Cohort, Modality, prepare_modality, presence_patterns, qc_summary, read_clinical, read_matrix
from strataweave.data.cohort import CASE_ONLY, FAILED_LIBRARY, NOT_IN_CLINICAL, unsplit_data
from strataweave.data.qc import unmatched_counts

CLINICAL_IDS = [f"P{i:02d}" for i in range(12)]


def _clinical():
    return pd.DataFrame({"age_years": np.arange(12.0) + 40}, index=pd.Index(CLINICAL_IDS, name="patient_id"))


def _modality(name, ids, n_features=3, kind="log_expression", seed=0):
    rng = np.random.default_rng(seed)
    data = pd.DataFrame(rng.normal(size=(len(ids), n_features)), index=ids,
                        columns=[f"{name}_{j}" for j in range(n_features)])
    return Modality(name, kind, data, source=f"{name}.tsv")


def test_patients_presence_and_aligned_views():
    rna = _modality("rna", CLINICAL_IDS[:10][::-1])
    protein = _modality("protein", [" P05 "] + CLINICAL_IDS[6:] + ["ZZ9"], seed=1)
    cohort = Cohort(_clinical(), [rna, protein], min_patients=3)
    assert list(cohort.patients) == CLINICAL_IDS  # clinical order, union of modalities
    presence = cohort.presence
    assert presence["rna"].sum() == 10 and presence["protein"].sum() == 7
    assert presence.loc["P05", "protein"] and not presence.loc["P04", "protein"]
    views = cohort.aligned_views()
    assert all(view.index.equals(cohort.patients) for view in views)
    assert views[1].loc["P04"].isna().all()
    np.testing.assert_array_equal(views[0].loc["P03"].to_numpy(), rna.data.loc["P03"].to_numpy())
    subset = cohort.aligned_views(["P11", "P00"])
    assert list(subset[0].index) == ["P11", "P00"]


def test_patients_outside_the_clinical_table_are_reported_not_merged():
    rna = _modality("rna", CLINICAL_IDS[:8] + ["p09", "Q1"])
    cohort = Cohort(_clinical(), [rna], min_patients=3)
    assert "p09" not in cohort.patients and "P09" not in cohort.patients
    rows = cohort.unmatched.set_index("patient_id")
    assert rows.loc["p09", "reason"] == CASE_ONLY and rows.loc["p09", "clinical_id"] == "P09"
    assert rows.loc["Q1", "reason"] == NOT_IN_CLINICAL and rows.loc["Q1", "clinical_id"] == ""
    assert qc_summary(cohort).loc["rna", "patients_unmatched"] == 2
    counts = unmatched_counts(cohort.unmatched)
    assert sorted(counts.itertuples(index=False, name=None)) == sorted(
        [("rna", CASE_ONLY, 1), ("rna", NOT_IN_CLINICAL, 1)]
    )
    assert "p09" not in counts.to_string() and "Q1" not in counts.to_string()


def _counts_table(rng, ids, n_features=40):
    counts = rng.poisson(50.0, size=(len(ids), n_features)).astype(float)
    return pd.DataFrame(counts, index=pd.Index(ids, name="patient_id"), columns=[f"G{j}" for j in range(n_features)])


def test_a_failed_library_is_set_aside_and_listed_with_its_reason():
    # Reads on 3 of 40 features: the median ratio to any reference is zero (Anders & Huber
    # 2010), so the profile cannot be normalised; it is listed, not modelled.
    rng = np.random.default_rng(5)
    raw = _counts_table(rng, CLINICAL_IDS)
    raw.loc["P04"] = 0.0
    raw.loc["P04", ["G1", "G2", "G3"]] = [90000.0, 10.0, 3.0]
    rna = prepare_modality("rna", "counts", raw, source="rna.tsv", patients=pd.Index(CLINICAL_IDS))
    cohort = Cohort(_clinical(), [rna], min_patients=3)
    assert "P04" not in cohort.patients and len(cohort.patients) == 11
    assert cohort.unmatched.set_index("patient_id").loc["P04", "reason"] == FAILED_LIBRARY
    kept = prepare_modality("rna", "counts", raw.drop(index="P04"), patients=pd.Index(CLINICAL_IDS))
    pd.testing.assert_frame_equal(rna.data, kept.data)  # the failed profile shaped nothing
    total = prepare_modality("rna", "counts", raw, patients=pd.Index(CLINICAL_IDS), library_size="total")
    assert "P04" in total.data.index and total.set_aside.empty


def test_a_sparse_counts_layer_sets_no_patient_aside():
    rng = np.random.default_rng(6)
    raw = _counts_table(rng, CLINICAL_IDS)
    raw.iloc[:, :25] = 0.0  # most features unexpressed in every patient: typical of sparse layers
    raw.loc["P02"] = 0.0
    raw.loc["P02", "G30"] = 40.0
    assert prepare_modality("rna", "counts", raw, patients=pd.Index(CLINICAL_IDS)).set_aside.empty


def test_unsplit_data_is_the_preparation_without_the_sign_split():
    rng = np.random.default_rng(3)
    raw = pd.DataFrame(rng.normal(size=(12, 6)), index=CLINICAL_IDS, columns=[f"GX{j}" for j in range(6)])
    raw.iloc[2, 1] = np.nan
    options = {"top_features": 4, "impute": "knn", "impute_neighbours": 3, "scale": "zscore"}
    split = prepare_modality("rna", "log_expression", raw, non_negative="split", **options)
    plain = prepare_modality("rna", "log_expression", raw, non_negative="none", **options)
    unsplit = unsplit_data(split)
    pd.testing.assert_frame_equal(unsplit, plain.data)
    # split_signs gives [max(x, 0), max(-x, 0)]: positive part minus negative part is x again.
    n = unsplit.shape[1]
    np.testing.assert_allclose(split.data.iloc[:, :n].to_numpy() - split.data.iloc[:, n:].to_numpy(), unsplit.to_numpy())
    assert unsplit_data(plain) is plain.data


def test_no_shared_patient_is_an_error_naming_the_modality():
    with pytest.raises(InputError, match=r"^mirna\.tsv \(modality 'mirna'\): patients: found none of 4"):
        Cohort(_clinical(), [_modality("mirna", ["A", "B", "C", "D"])])


def test_too_few_patients_is_an_error():
    with pytest.raises(InputError, match=r"mirna\.tsv \(modality 'mirna'\): patients: found 4; expected at least 5"):
        Cohort(_clinical(), [_modality("mirna", CLINICAL_IDS[:4])], min_patients=5)


def test_duplicate_modality_name_is_an_error():
    with pytest.raises(InputError, match="modality 'rna': found the name twice"):
        Cohort(_clinical(), [_modality("rna", CLINICAL_IDS), _modality("rna", CLINICAL_IDS)], min_patients=3)


def test_unknown_kind_is_an_error():
    with pytest.raises(InputError, match="key 'kind': found 'reads'"):
        _modality("rna", CLINICAL_IDS, kind="reads")


def test_qc_summary_and_presence_patterns_from_files(tmp_path):
    rng = np.random.default_rng(2)
    (tmp_path / "clinical.tsv").write_text(
        "patient_id\tage_years\n" + "".join(f"{p}\t{50 + i}\n" for i, p in enumerate(CLINICAL_IDS))
    )
    counts = pd.DataFrame(rng.poisson(30, size=(6, 10)), index=[f"GX{j}" for j in range(6)], columns=CLINICAL_IDS[:10])
    counts.to_csv(tmp_path / "rna.tsv", sep="\t", index_label="feature")
    protein = pd.DataFrame(rng.lognormal(size=(8, 5)), index=CLINICAL_IDS[4:], columns=[f"QX{j}" for j in range(5)])
    protein.iloc[0, 0] = np.nan
    protein.iloc[1, 0] = np.nan
    protein.iloc[2, 0] = np.nan
    protein.to_csv(tmp_path / "protein.csv", index_label="patient_id", na_rep="NA")
    clinical = read_clinical(tmp_path / "clinical.tsv", "patient_id")
    rna_raw = read_matrix(tmp_path / "rna.tsv", known_ids=clinical.index, kind="counts")
    protein_raw = read_matrix(tmp_path / "protein.csv", known_ids=clinical.index, kind="abundance")
    cohort = Cohort(clinical, [
        prepare_modality("rna", "counts", rna_raw, source="rna.tsv", patients=clinical.index, top_features=4),
        prepare_modality("protein", "abundance", protein_raw, source="protein.csv", max_missing_fraction=0.25),
    ], min_patients=5)
    qc = qc_summary(cohort)
    assert qc.loc["rna", "patients"] == 10 and qc.loc["protein", "patients"] == 8
    assert list(qc.loc["rna", ["features_input", "after_missing_filter", "after_top_features", "features_used"]]) == [6, 6, 4, 4]
    # QX0 misses 3 of 8 patients (0.375 > 0.25) and is filtered out.
    assert qc.loc["protein", "after_missing_filter"] == 4
    assert qc.loc["protein", "missing_fraction"] == pytest.approx(3 / 40)
    patterns = presence_patterns(cohort)
    assert patterns["patients"].sum() == cohort.patients.size == 12
    both = patterns[(patterns["rna"]) & (patterns["protein"])]
    assert both["patients"].item() == 6 and both["modalities"].item() == 2
    assert patterns.iloc[0]["modalities"] == 2
