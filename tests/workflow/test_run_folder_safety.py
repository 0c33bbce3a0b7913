"""Bad input leaves no run folder, a failed --overwrite keeps the earlier run, assign writes over nothing, one run per folder."""

from __future__ import annotations

import json
import os

from strataweave.cli import main
from strataweave.workflow.commands import check_table_out
from strataweave.workflow.run_folder import RUN_FORMAT, prepare_run_folder, run_lock, start_staging


def _break_matrix(files) -> None:
    (files / "rna.tsv").write_text("feature\tP0\tP1\nG0\t1\tnot-a-number\n")


def test_bad_input_exits_2_and_leaves_no_folder(tiny_files, capsys) -> None:
    _break_matrix(tiny_files)
    out = tiny_files / "run"
    assert main(["run", str(tiny_files / "flow.toml"), "--out", str(out), "--quiet"]) == 2
    assert "rna.tsv" in capsys.readouterr().err
    assert sorted(p.name for p in tiny_files.iterdir()) == ["clinical.tsv", "flow.toml", "rna.tsv"]
    assert main(["run", str(tiny_files / "flow.toml"), "--out", str(tiny_files / "new" / "deeper" / "run"), "--quiet"]) == 2
    assert main(["run", str(tiny_files / "flow.toml"), "--out", str(tiny_files / "rna.tsv" / "run"), "--quiet"]) == 2
    assert "a file is in the way" in capsys.readouterr().err
    assert sorted(p.name for p in tiny_files.iterdir()) == ["clinical.tsv", "flow.toml", "rna.tsv"]


def test_failed_overwrite_leaves_the_earlier_run_intact(tiny_files) -> None:
    out = tiny_files / "run"
    (out / "stages").mkdir(parents=True)
    manifest = json.dumps({"format": RUN_FORMAT, "status": "finished"})
    (out / "manifest.json").write_text(manifest)
    (out / "assignments.tsv").write_text("patient_id\tsubtype\nP0\tS1\n")
    _break_matrix(tiny_files)
    assert main(["run", str(tiny_files / "flow.toml"), "--out", str(out), "--quiet", "--overwrite"]) == 2
    assert (out / "manifest.json").read_text() == manifest
    assert sorted(p.name for p in out.iterdir()) == ["assignments.tsv", "manifest.json", "stages"]
    assert sorted(p.name for p in tiny_files.iterdir()) == ["clinical.tsv", "flow.toml", "rna.tsv", "run"]


def _finished_run(files, name: str = "done"):
    run = files / name
    run.mkdir()
    manifest = {"format": RUN_FORMAT, "status": "finished", "inputs": {str((files / "clinical.tsv").resolve()): "0"},
                "workflow": {"path": str(files / "flow.toml")}}
    (run / "manifest.json").write_text(json.dumps(manifest))
    (run / "assignments.tsv").write_text("patient_id\tsubtype\nP0\tS1\n")
    return run


def test_assign_refuses_to_write_over_inputs_runs_and_existing_files(tiny_files, capsys) -> None:
    run = _finished_run(tiny_files)
    (tiny_files / "old.tsv").write_text("keep me\n")
    new = tiny_files / "rna.tsv"
    cases = {
        new: "is an input", tiny_files / "clinical.tsv": "is an input", tiny_files / "flow.toml": "is an input",
        run / "assignments.tsv": "inside the finished run", run / "new.tsv": "inside the finished run",
        tiny_files / "old.tsv": "--force",
    }
    before = {path: path.read_bytes() for path in tiny_files.rglob("*") if path.is_file()}
    for out, reason in cases.items():
        assert main(["assign", str(run), "--modality", f"rna={new}", "--out", str(out)]) == 2
        err = capsys.readouterr().err.strip()
        assert reason in err and str(out) in err and len(err.splitlines()) == 1
    for out in [new, run / "assignments.tsv"]:
        assert main(["assign", str(run), "--modality", f"rna={new}", "--out", str(out), "--force"]) == 2
    assert {path: path.read_bytes() for path in tiny_files.rglob("*") if path.is_file()} == before
    check_table_out(tiny_files / "old.tsv", run, {"rna": new}, force=True)  # an unrelated file, replaced when asked


def test_a_second_run_into_a_locked_folder_exits_2_naming_the_holder(tiny_files, capsys) -> None:
    out = tiny_files / "run"
    staging = prepare_run_folder(out)
    start_staging(staging)
    with run_lock(staging, print):
        assert main(["run", str(tiny_files / "flow.toml"), "--out", str(out), "--quiet"]) == 2
        err = capsys.readouterr().err.strip()
        assert f"locked by PID {os.getpid()} started " in err and len(err.splitlines()) == 1
        assert sorted(p.name for p in staging.path.iterdir()) == [".lock"]
    assert not out.exists()


def test_the_stale_lock_of_a_dead_process_is_taken_over_with_a_notice(tmp_path) -> None:
    staging = prepare_run_folder(tmp_path / "run")
    start_staging(staging)
    (staging.path / ".lock").write_text("PID 999999999 started 2026-01-01T00:00:00+00:00\n")
    notices: list[str] = []
    with run_lock(staging, notices.append):
        assert (staging.path / ".lock").read_text().startswith(f"PID {os.getpid()} started ")
    assert len(notices) == 1 and "PID 999999999" in notices[0] and "no longer running" in notices[0]


def test_compare_writes_neither_into_a_finished_run_nor_over_earlier_tables_unasked(tiny_files, capsys) -> None:
    run_a, run_b = _finished_run(tiny_files, "a"), _finished_run(tiny_files, "b")
    before = {path: path.read_bytes() for path in tiny_files.rglob("*") if path.is_file()}
    assert main(["compare", str(run_a), str(run_b), "--out", str(run_b)]) == 2
    assert "inside the finished run folder" in capsys.readouterr().err
    assert {path: path.read_bytes() for path in tiny_files.rglob("*") if path.is_file()} == before
    out = tiny_files / "cmp"
    assert main(["compare", str(run_a), str(run_b), "--out", str(out)]) == 0
    (out / "flow.tsv").write_text("mine\n")
    assert main(["compare", str(run_a), str(run_b), "--out", str(out)]) == 2
    assert "--force" in capsys.readouterr().err and (out / "flow.tsv").read_text() == "mine\n"
    assert main(["compare", str(run_a), str(run_b), "--out", str(out), "--force"]) == 0
    assert (out / "flow.tsv").read_text() != "mine\n"
