"""Readers: formats, orientation, identifiers, clinical column types; inputs are never modified."""

import gzip

import numpy as np
import pandas as pd
import pytest

from strataweave.data import Preprocessor, read_clinical, read_matrix
from strataweave.data.cells import quick_numbers, read_table
from strataweave.files import sha256_file

PATIENTS = ["P01", "P02", "P03"]
FEATURES = ["GX1", "GX2"]
VALUES = np.array([[1.0, 2.0], [3.0, np.nan], [5.0, 6.5]])


def _features_in_rows(separator: str) -> str:
    lines = [separator.join(["feature", *PATIENTS])]
    for j, feature in enumerate(FEATURES):
        cells = ["" if np.isnan(v) else f"{v:g}" for v in VALUES[:, j]]
        lines.append(separator.join([feature, *cells]))
    return "\n".join(lines) + "\n"


def _samples_in_rows(separator: str) -> str:
    lines = [separator.join(["patient_id", *FEATURES])]
    for i, patient in enumerate(PATIENTS):
        cells = ["NA" if np.isnan(v) else f"{v:g}" for v in VALUES[i]]
        lines.append(separator.join([f" {patient} ", *cells]))
    return "\n".join(lines) + "\n"


def _expected() -> pd.DataFrame:
    return pd.DataFrame(VALUES, index=pd.Index(PATIENTS), columns=pd.Index(FEATURES))


@pytest.mark.parametrize(
    "name, text",
    [
        ("m.tsv", _features_in_rows("\t")),
        ("m.csv", _features_in_rows(",")),
        ("m.txt", _samples_in_rows("\t")),
        ("m.csv", "# comment line\n# another\n" + _samples_in_rows(",")),
        # Quoted fields take the CSV-module path instead of the fast parser: same result.
        ("m.csv", "\n".join('"' + line.replace(",", '","') + '"' for line in _samples_in_rows(",").splitlines())),
        ("m.csv", _samples_in_rows(",").replace("6.5", " 6.5 ")),
    ],
)
def test_both_orientations_are_detected_from_clinical_ids(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    got = read_matrix(path, known_ids=["P01", "P02", "P03", "P99"])
    pd.testing.assert_frame_equal(got, _expected(), check_names=False)
    assert got.index.name == "patient_id"


def test_gzip_and_parquet_read_like_plain_text(tmp_path):
    gz = tmp_path / "m.tsv.gz"
    gz.write_bytes(gzip.compress(_features_in_rows("\t").encode()))
    pd.testing.assert_frame_equal(read_matrix(gz, orientation="features_in_rows"), _expected(), check_names=False)
    pytest.importorskip("pyarrow")
    parquet = tmp_path / "m.parquet"
    _expected().rename_axis("patient_id").reset_index().to_parquet(parquet)
    pd.testing.assert_frame_equal(read_matrix(parquet, orientation="samples_in_rows"), _expected(), check_names=False)


def test_given_orientation_wins_over_detection(tmp_path):
    path = tmp_path / "m.tsv"
    path.write_text(_features_in_rows("\t"))
    got = read_matrix(path, orientation="samples_in_rows")
    assert list(got.index) == FEATURES


def test_clinical_columns_become_numbers_or_text(tmp_path):
    path = tmp_path / "clinical.tsv"
    path.write_text("patient_id\tage_years\tsex\tstage\n P01\t61\tF\tII\nP02\tNA\tM\t\nP03\t47.5\tF\tIV\n")
    clinical = read_clinical(path, "patient_id")
    assert list(clinical.index) == PATIENTS
    assert clinical["age_years"].dtype == np.float64
    assert np.isnan(clinical.loc["P02", "age_years"])
    assert list(clinical["sex"]) == ["F", "M", "F"]
    assert clinical.loc["P02", "stage"] is None


def test_reading_and_preprocessing_never_modify_inputs(tmp_path):
    path = tmp_path / "counts.tsv"
    path.write_text(_features_in_rows("\t"))
    before = sha256_file(path)
    raw = read_matrix(path, known_ids=PATIENTS, kind="counts")
    copy = raw.copy()
    Preprocessor("counts", max_missing_fraction=1.0, impute="median").fit_transform(raw)
    assert sha256_file(path) == before
    pd.testing.assert_frame_equal(raw, copy)


def test_plain_numeric_table_takes_the_fast_parser(tmp_path):
    path = tmp_path / "m.tsv"
    path.write_text(_features_in_rows("\t"))
    header, labels, values = quick_numbers(read_table(path))
    assert list(header) == ["feature", *PATIENTS] and list(labels) == FEATURES
    np.testing.assert_array_equal(values, VALUES.T)
    path.write_text(_features_in_rows("\t").replace("6.5", "six"))
    assert quick_numbers(read_table(path)) is None
