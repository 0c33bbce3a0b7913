"""The shared pieces at the package root: InputError, the caution, safe writes, seeds."""

import numpy as np
import pandas as pd
import pytest

import strataweave
from strataweave.files import (
    atomic_write_arrays,
    atomic_write_bytes,
    atomic_write_text,
    guard_cell,
    sha256_file,
    write_table,
)
from strataweave.seeding import child_seeds


def test_input_error_is_importable_from_the_root_and_is_a_value_error():
    assert issubclass(strataweave.InputError, ValueError)
    with pytest.raises(strataweave.InputError):
        raise strataweave.InputError("rna.tsv, row 3: found 'abc', expected a number")


def test_caution_names_research_use_clinical_decisions_and_clinicians():
    text = strataweave.CAUTION.lower()
    for phrase in ("research use only", "not for clinical decisions", "licensed clinicians", "local regulations"):
        assert phrase in text


@pytest.mark.parametrize(
    "cell, expected",
    [("=SUM(A1)", "'=SUM(A1)"), ("+cmd", "'+cmd"), ("@x", "'@x"), ("-x", "'-x"), ("-1.5", "-1.5"), (3, 3), ("GENE1", "GENE1")],
)
def test_guard_cell_neutralises_formulas_but_not_numbers(cell, expected):
    assert guard_cell(cell) == expected


def test_write_table_guards_cells_and_names_and_writes_comment(tmp_path):
    frame = pd.DataFrame({"=name": ["=HYPERLINK()", "ok"], "value": [-1.0, 2.0]})
    path = tmp_path / "t.tsv"
    write_table(frame, path, comment="caution")
    lines = path.read_text().splitlines()
    assert lines[0] == "# caution"
    assert lines[1] == "'=name\tvalue"
    assert lines[2] == "'=HYPERLINK()\t-1"
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")], "temporary file left behind"


def test_atomic_write_gives_the_mode_a_plain_open_would(tmp_path):
    plain = tmp_path / "plain.txt"
    plain.write_text("x")
    written = tmp_path / "atomic.txt"
    atomic_write_text(written, "x")
    assert written.stat().st_mode == plain.stat().st_mode


def test_atomic_write_leaves_old_content_when_writing_fails(tmp_path):
    path = tmp_path / "a.txt"
    atomic_write_text(path, "old")
    with pytest.raises(TypeError):
        atomic_write_bytes(path, "text where bytes were expected")  # type: ignore[arg-type]
    assert path.read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt"]


def test_sha256_matches_hashlib(tmp_path):
    import hashlib  # reference: Python standard library

    path = tmp_path / "b.bin"
    path.write_bytes(b"strataweave" * 1000)
    assert sha256_file(path) == hashlib.sha256(b"strataweave" * 1000).hexdigest()


def test_child_seeds_are_reproducible_distinct_and_follow_seed_sequence_spawn():
    seeds = child_seeds(42, 5)
    assert seeds == child_seeds(42, 5)
    assert len(set(seeds)) == 5
    # Reference: numpy's SeedSequence.spawn produces the children; generate_state gives the integer.
    expected = [int(c.generate_state(1, dtype=np.uint32)[0]) for c in np.random.SeedSequence(42).spawn(5)]
    assert seeds == expected


def test_atomic_write_arrays_round_trips_without_pickle(tmp_path):
    arrays = {"centres": np.arange(6.0).reshape(2, 3), "names": np.array(["S1", "S2"])}
    atomic_write_arrays(tmp_path / "a.npz", arrays)
    with np.load(tmp_path / "a.npz", allow_pickle=False) as archive:  # numpy's own reader is the reference
        assert sorted(archive.files) == ["centres", "names"]
        np.testing.assert_array_equal(archive["centres"], arrays["centres"])
        np.testing.assert_array_equal(archive["names"], arrays["names"])
    assert [p.name for p in tmp_path.iterdir()] == ["a.npz"]  # no temporary file left behind
