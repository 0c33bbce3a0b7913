"""Faults injected on purpose: damaged cache and model files.

Each test breaks one thing the way a crash, a careless user or a flaky machine would and
checks what the program promises: the exit code, one line naming the file and the reason,
and that nothing finished is lost. The runs are small (90 invented patients, RNA counts and
protein, four resamples, no report) so the module stays fast.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from strataweave.cli import main
from workflow_files import write_synthetic_inputs

TABLES = ["assignments.tsv", "rank_selection.tsv", "survival.tsv", "clinical.tsv", "results.json"]


def run(flow: Path, out: Path, *options: str) -> int:
    return main(["run", str(flow), "--out", str(out), "--quiet", *options])


def same_tables(a: Path, b: Path) -> bool:
    return all((a / name).read_bytes() == (b / name).read_bytes() for name in TABLES)


@pytest.fixture(scope="module")
def finished(tmp_path_factory) -> Path:
    """One uninterrupted run of the small workflow, never changed by the tests."""
    flow = write_synthetic_inputs(tmp_path_factory.mktemp("cohort"), ("rna", "protein"), formats="[]")
    assert run(flow, flow.parent / "run") == 0
    return flow.parent / "run"


@pytest.fixture
def copy_of(finished, tmp_path) -> Path:
    """A copy of the finished run and its inputs that a test may damage."""
    shutil.copytree(finished.parent, tmp_path / "cohort")
    return tmp_path / "cohort" / "run"


def _truncate(path: Path) -> None:
    path.write_bytes(path.read_bytes()[: path.stat().st_size // 2])


def _flip_a_byte(path: Path) -> None:
    data = bytearray(path.read_bytes())
    data[len(data) // 2] ^= 0xFF
    path.write_bytes(bytes(data))


def _change_a_digit(path: Path) -> None:
    text = path.read_text()
    position = next(i for i in range(len(text) // 2, len(text)) if text[i].isdigit())
    path.write_text(text[:position] + str((int(text[position]) + 1) % 10) + text[position + 1:])


@pytest.mark.parametrize(
    ("damage", "suffix"),
    [(_truncate, ".npz"), (_flip_a_byte, ".npz"), (_change_a_digit, ".json"), (_truncate, ".json")],
)
def test_a_damaged_cache_entry_is_computed_again_with_a_one_line_notice(finished, copy_of, capsys, damage, suffix):
    entry = next((copy_of / "stages").glob(f"sweep-*{suffix}"))
    damage(entry)
    assert main(["run", str(copy_of.parent / "flow.toml"), "--out", str(copy_of), "--overwrite"]) == 0
    notices = [line for line in capsys.readouterr().err.splitlines() if entry.name in line]
    assert len(notices) == 1 and notices[0].endswith("computing stage 'sweep' again"), notices
    assert same_tables(copy_of, finished)


@pytest.mark.parametrize(("damage", "name"), [(_truncate, "arrays.npz"), (_flip_a_byte, "arrays.npz"),
                                               (_change_a_digit, "model.json")])
def test_a_damaged_model_file_exits_2_naming_it(copy_of, capsys, damage, name):
    damage(copy_of / "model" / name)
    rna = copy_of.parent / "rna.tsv"
    assert main(["assign", str(copy_of), "--modality", f"rna={rna}"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and str(copy_of / "model" / name) in err, err
