"""The run folder: refuse what is not one, resume an unfinished run, protect a finished one."""

from __future__ import annotations

import json

import pytest

from strataweave import InputError
from strataweave.workflow.run_folder import RUN_FORMAT, RunFolder, finished_run, prepare_run_folder


def _manifest(folder, status: str) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "manifest.json").write_text(json.dumps({"format": RUN_FORMAT, "status": status}))


def test_new_and_empty_folders_are_accepted(tmp_path) -> None:
    assert prepare_run_folder(tmp_path / "new").path == tmp_path.resolve() / ".new.running"
    (tmp_path / "empty").mkdir()
    assert prepare_run_folder(tmp_path / "empty").path == tmp_path.resolve() / ".empty.running"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["empty"]


def test_a_folder_that_is_not_a_run_is_refused_and_left_alone(tmp_path) -> None:
    precious = tmp_path / "thesis"
    precious.mkdir()
    (precious / "chapter1.txt").write_text("do not touch")
    with pytest.raises(InputError, match="no run manifest"):
        prepare_run_folder(precious)
    assert sorted(p.name for p in precious.iterdir()) == ["chapter1.txt"]
    (precious / "manifest.json").write_text('{"format": "something else"}')
    with pytest.raises(InputError, match="no run manifest"):
        prepare_run_folder(precious, overwrite=True)


def test_a_finished_run_is_replaced_only_when_asked(tmp_path) -> None:
    run = tmp_path / "run"
    _manifest(run, "finished")
    with pytest.raises(InputError, match="--overwrite"):
        prepare_run_folder(run)
    assert prepare_run_folder(run, overwrite=True).path == tmp_path.resolve() / ".run.running"


def test_an_unfinished_run_is_resumed(tmp_path) -> None:
    run = tmp_path / "run"
    _manifest(run, "running")
    assert prepare_run_folder(run).path == tmp_path.resolve() / ".run.running"
    with pytest.raises(InputError, match="expected 'finished'"):
        finished_run(run)


def test_finished_run_reads_only_run_folders(tmp_path) -> None:
    with pytest.raises(InputError, match="no run manifest"):
        finished_run(tmp_path)
    _manifest(tmp_path / "done", "finished")
    assert finished_run(tmp_path / "done").path == (tmp_path / "done").resolve()


def test_clearing_outputs_keeps_the_stage_cache_and_foreign_files(tmp_path) -> None:
    run = tmp_path / "run"
    _manifest(run, "finished")
    for name in ["results.json", "markers/old_layer.tsv", "figures/a.png", "stages/load-1234.json", "notes.txt"]:
        (run / name).parent.mkdir(parents=True, exist_ok=True)
        (run / name).write_text("x")
    RunFolder(run).clear_outputs()
    left = sorted(str(p.relative_to(run)) for p in run.rglob("*") if p.is_file())
    assert left == ["manifest.json", "notes.txt", "stages/load-1234.json"]
