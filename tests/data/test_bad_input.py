"""Malformed inputs raise InputError naming the file and the position; readers raise nothing else."""

import gzip
import os
import re
import tempfile

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from strataweave import InputError
from strataweave.data import read_clinical, read_matrix
from strataweave.files import sha256_file

IDS = ["P1", "P2", "P3"]


def _matrix(**options):
    return lambda path: read_matrix(path, known_ids=IDS, **options)


def _clinical(path):
    return read_clinical(path, "patient_id")


# (case, file name, content, reader, pattern the message must contain after the file name)
CASES = [
    ("empty file", "m.tsv", b"", _matrix(), r"file: found no table"),
    ("only comments", "m.tsv", b"# nothing\n", _matrix(), r"file: found no table"),
    ("header only", "m.tsv", b"f\tP1\tP2\n", _matrix(), r"file: found 0 data rows"),
    ("duplicate patient", "m.tsv", b"id\tG1\nP1\t1\nP2\t2\nP1\t3\n", _matrix(), r"line 4 \(row 'P1'\).*repeats.*line 2"),
    ("duplicate feature", "m.tsv", b"f\tP1\tP2\nG1\t1\t2\nG1\t3\t4\n", _matrix(), r"line 3 \(row 'G1'\)"),
    ("duplicate column", "m.tsv", b"f\tP1\tP1\nG1\t1\t2\n", _matrix(), r"column 'P1'.*repeats"),
    ("case-only twins", "m.tsv", b"f\tP1\tp1\tP2\nG1\t1\t2\t3\n", _matrix(), r"column 'p1'.*differs only in case"),
    ("non-numeric", "m.tsv", b"f\tP1\tP2\nG1\t1\tabc\n", _matrix(), r"line 2 \(row 'G1'\), column 'P2': found 'abc'"),
    ("infinity", "m.tsv", b"f\tP1\tP2\nG1\t1\tinf\nG2\t1\t2\n", _matrix(), r"line 2 \(row 'G1'\), column 'P2': found 'inf'"),
    ("negative count", "m.tsv", b"f\tP1\tP2\nG1\t1\t2\nG2\t-3\t2\n", _matrix(kind="counts"), r"line 3 \(row 'G2'\), column 'P1'.*non-negative count"),
    ("beta above 1", "m.csv", b"id,C1,C2\nP1,0.2,1.3\nP2,0.5,0.5\n", _matrix(kind="beta"), r"line 2 \(row 'P1'\), column 'C2'.*\[0, 1\]"),
    ("beta below 0", "m.csv", b"id,C1,C2\nP1,0.2,0.3\nP2,-0.1,0.5\n", _matrix(kind="beta"), r"line 3 \(row 'P2'\), column 'C1'"),
    ("all-missing row", "m.tsv", b"f\tP1\tP2\nG1\tNA\t\nG2\t1\t2\n", _matrix(), r"line 2 \(row 'G1'\): found no values"),
    ("all-missing column", "m.tsv", b"f\tP1\tP2\nG1\t1\tNA\nG2\t1\tNA\n", _matrix(), r"column 'P2': found no values"),
    ("short row", "m.tsv", b"f\tP1\tP2\nG1\t1\t2\nG2\t1\n", _matrix(), r"line 3: found 2 fields; expected 3"),
    ("long row", "m.csv", b"f,P1,P2\nG1,1,2,3\n", _matrix(), r"line 2: found 4 fields"),
    ("blank line inside", "m.csv", b"f,P1,P2\n\nG1,1,2\n", _matrix(), r"line 2: found 0 fields"),
    ("empty identifier", "m.tsv", b"f\tP1\tP2\n \t1\t2\n", _matrix(), r"line 2 \(row ' '\): found an empty identifier"),
    ("not UTF-8", "m.tsv", b"f\tP1\nG1\t\xff\xfe\n", _matrix(), r"byte \d+: found bytes that are not UTF-8"),
    ("NUL byte", "m.tsv", b"f\tP1\nG1\t1\x002\n", _matrix(), r"line 2: found a NUL byte"),
    ("damaged gzip", "m.tsv.gz", gzip.compress(b"f\tP1\nG1\t1\n")[:-6], _matrix(), r"file: found a damaged gzip"),
    ("bad quoting", "m.csv", b'f,P1,P2\nG1,"1"x,2\n', _matrix(), r"line 2: found malformed quoting"),
    ("undecidable orientation", "m.tsv", b"f\tA\tB\nG1\t1\t2\n", _matrix(), r"orientation: found 0 of 1 row IDs and 0 of 2"),
    ("unknown kind", "m.tsv", b"f\tP1\nG1\t1\n", _matrix(kind="reads"), r"key 'kind': found 'reads'"),
    ("damaged Parquet", "m.parquet", b"PAR1garbage", _matrix(), r"file: found an unreadable Parquet"),
    ("clinical without id column", "c.tsv", b"pid\tage\nP1\t3\n", _clinical, r"line 1 \(header\): found columns 'pid'"),
    ("clinical duplicate patient", "c.tsv", b"patient_id\tage\nP1\t3\n P1 \t4\n", _clinical, r"line 3 \(row ' P1 '\).*repeats"),
]


@pytest.mark.parametrize("case, name, content, reader, pattern", CASES, ids=[c[0] for c in CASES])
def test_malformed_input_names_file_and_position(tmp_path, case, name, content, reader, pattern):
    path = tmp_path / name
    path.write_bytes(content)
    before = sha256_file(path)
    with pytest.raises(InputError) as caught:
        reader(path)
    message = str(caught.value)
    assert message.startswith(str(path)), message
    assert re.search(pattern, message), message
    assert "\n" not in message
    assert sha256_file(path) == before


def test_table_has_at_least_fifteen_cases():
    assert len(CASES) >= 15


def _read_all_ways(content: bytes, suffix: str) -> None:
    """Feed `content` to every reader; anything but success or InputError fails the test."""
    handle, name = tempfile.mkstemp(suffix=suffix)
    try:
        with os.fdopen(handle, "wb") as out:
            out.write(content)
        for reader in (
            lambda p: read_matrix(p, orientation="samples_in_rows"),
            lambda p: read_matrix(p, known_ids=IDS, kind="counts"),
            lambda p: read_clinical(p, "patient_id"),
        ):
            try:
                reader(name)
            except InputError:
                pass
    finally:
        os.unlink(name)


_FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@_FUZZ
@given(content=st.binary(max_size=300), suffix=st.sampled_from([".tsv", ".csv", ".gz", ".parquet", ".txt"]))
def test_random_bytes_raise_only_input_error(content, suffix):
    _read_all_ways(content, suffix)


_CSV_PIECES = st.sampled_from(
    ["P1", "P2", "p1", "patient_id", "G1", ",", "\t", "\n", '"', "#", "1", "-2.5", "1e400", "NA", "", " ", "nan", "inf", "x", "\r"]
)


@_FUZZ
@given(pieces=st.lists(_CSV_PIECES, max_size=60), suffix=st.sampled_from([".tsv", ".csv"]))
def test_random_malformed_csv_text_raises_only_input_error(pieces, suffix):
    _read_all_ways("".join(pieces).encode(), suffix)
