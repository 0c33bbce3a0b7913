"""Faults injected on purpose: bad input files, two runs into one folder, damaged cache and
model files, a sweep killed midway, a full disk or file-size limit, a read-only file system,
memory exhausted, a loop of links, and inputs whose messages used to point to the wrong place.

Each test breaks one thing the way a crash, a careless user or a flaky machine would and
checks what the program promises: the exit code, one line naming the file and the reason,
and that nothing finished is lost. The runs are small (90 invented patients, RNA counts and
protein, four resamples, no report) so the module stays fast.
"""

from __future__ import annotations

import errno
import gzip
import os
import resource
import shutil
import signal
import subprocess
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from joblib.externals.loky.process_executor import TerminatedWorkerError

from strataweave.cli import main
from strataweave.subtypes.tasks import ResampleFit, fit_resample
from strataweave.workflow.cache import ResampleCheckpoint
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


def _kill_once_resamples_are_kept(command: list[str], work_glob: str, staging: Path, at_least: int) -> int:
    """Start the run, SIGKILL it once `at_least` resample tasks are kept; its exit code."""
    process = subprocess.Popen(command, stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.monotonic() + 120
    while process.poll() is None and time.monotonic() < deadline:
        if len(list(staging.glob(work_glob))) >= at_least:
            os.killpg(process.pid, signal.SIGKILL)
            break
        time.sleep(0.005)
    return process.wait(timeout=60)


def test_a_sweep_killed_midway_resumes_after_its_finished_resamples_byte_identical(tmp_path, capsys):
    flow = write_synthetic_inputs(tmp_path / "cohort", ("rna", "protein"), formats="[]")
    flow.write_text(flow.read_text().replace("n_resamples = 4", "n_resamples = 16"))
    assert run(flow, tmp_path / "whole") == 0
    out = tmp_path / "resumed"
    command = [sys.executable, "-m", "strataweave.cli", "run", str(flow), "--out", str(out), "--quiet"]
    staging = tmp_path / ".resumed.running"
    assert _kill_once_resamples_are_kept(command, "stages/sweep-*.work/resample-*.json", staging, 3) == -signal.SIGKILL
    kept = len(list(staging.glob("stages/sweep-*.work/resample-*.json")))
    assert 3 <= kept < 16 and not list(staging.glob("stages/sweep-*.json"))

    assert main(["run", str(flow), "--out", str(out)]) == 0
    assert f"sweep: {kept} of 16 resamples already finished, resuming after them" in capsys.readouterr().err
    assert same_tables(out, tmp_path / "whole")
    assert not list(out.glob("stages/*.work"))


def test_a_damaged_kept_resample_is_run_again_with_a_notice(tmp_path):
    notices = []
    checkpoint = ResampleCheckpoint(tmp_path, notices.append)
    fit = ResampleFit(np.array([[0, 1, -1]], dtype=np.int16), 2)
    for task in [(0, 7), (1, 8)]:
        checkpoint.keep(fit_resample, task, fit)
    _flip_a_byte(tmp_path / "resample-1-8.npz")
    kept = checkpoint.finished(fit_resample, [(0, 7), (1, 8)])
    assert list(kept) == [0] and np.array_equal(kept[0].labels, fit.labels) and kept[0].unconverged == 2
    assert "resample-1-8.npz: checksum differs" in notices[0] and notices[0].endswith("running that resample again")


def _small_file_limit() -> None:
    """In the child: files may not grow past 64 KiB, and passing it is an error (EFBIG), not a signal."""
    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
    resource.setrlimit(resource.RLIMIT_FSIZE, (64 * 1024, 64 * 1024))


def test_a_file_size_limit_exits_3_saying_nothing_was_lost_and_the_rerun_resumes(finished, tmp_path, capsys):
    flow = finished.parent / "flow.toml"
    out = tmp_path / "run"
    command = [sys.executable, "-m", "strataweave.cli", "run", str(flow), "--out", str(out), "--quiet"]
    stopped = subprocess.run(command, capture_output=True, text=True, preexec_fn=_small_file_limit,
                             env={**os.environ, "PYTHONDONTWRITEBYTECODE": "1"}, timeout=300)
    assert stopped.returncode == 3, stopped.stderr
    line = stopped.stderr.strip()
    assert len(line.splitlines()) == 1 and "a file reached the file-size limit at " in line
    assert "nothing was lost" in line and not out.exists()
    assert not [path for path in (tmp_path / ".run.running").rglob("*.tmp")]  # no half-written file left
    assert run(flow, out) == 0
    assert same_tables(out, finished)


def _raise(error: BaseException):
    def fail(*args, **kwargs):
        raise error

    return fail


@pytest.mark.parametrize(
    ("error", "code", "said"),
    [
        (OSError(errno.ENOSPC, "No space left on device"), 3, "stopped: the disk is full"),
        (OSError(errno.EROFS, "Read-only file system", "/mnt/runs/x"), 3, "the file system is read-only at /mnt/runs/x"),
        (MemoryError(), 3, "stopped: out of memory"),
        (TerminatedWorkerError("worker ended"), 3, "stopped: a worker process was killed (most often: out of memory)"),
        (FileNotFoundError(errno.ENOENT, "No such file or directory", "/gone/x.tsv"), 2,
         "error: /gone/x.tsv: No such file or directory, expected a path to an existing file or folder"),
        (ZeroDivisionError("division by zero"), 1, "internal error: ZeroDivisionError"),
    ],
)
def test_faults_of_the_machine_exit_3_bad_paths_2_and_both_keep_the_earlier_run(copy_of, capsys, monkeypatch, error, code, said):
    monkeypatch.setattr("strataweave.workflow.stages.run_sweep", _raise(error))
    (copy_of / "stages").joinpath("keep").mkdir()  # no cached sweep to read: the sweep must run
    for entry in (copy_of / "stages").glob("sweep-*"):
        entry.rename(copy_of / "stages" / "keep" / entry.name)
    before = {path: path.read_bytes() for path in copy_of.rglob("*") if path.is_file()}
    assert main(["run", str(copy_of.parent / "flow.toml"), "--out", str(copy_of), "--quiet", "--overwrite"]) == code
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and said in err, err
    assert ("nothing was lost" in err) == (code == 3)
    assert {path: path.read_bytes() for path in copy_of.rglob("*") if path.is_file()} == before


def test_a_loop_of_symbolic_links_is_a_bad_path_exit_2(finished, tmp_path, capsys):
    (tmp_path / "a").symlink_to(tmp_path / "b")
    (tmp_path / "b").symlink_to(tmp_path / "a")
    assert run(finished.parent / "flow.toml", tmp_path / "a" / "run") == 2
    assert main(["check", str(tmp_path / "a" / "flow.toml")]) == 2
    lines = capsys.readouterr().err.strip().splitlines()
    assert len(lines) == 2 and all("a loop of symbolic links" in line and str(tmp_path / "a") in line for line in lines)


def _check(flow: Path, capsys) -> tuple[int, str]:
    code = main(["check", str(flow)])
    return code, capsys.readouterr().err.strip()


def _edit_line(path: Path, number: int, edit) -> None:
    lines = path.read_text(encoding="utf-8").split("\n")
    lines[number - 1] = edit(lines[number - 1])
    path.write_text("\n".join(lines), encoding="utf-8")


def test_an_unterminated_quote_is_named_at_the_line_it_opens(copy_of, capsys):
    _edit_line(copy_of.parent / "clinical.tsv", 5, lambda line: line.replace("\t", '\t"', 1))
    code, err = _check(copy_of.parent / "flow.toml", capsys)
    assert code == 2 and "clinical.tsv: line 5: found a quote that is never closed" in err, err


def test_a_line_separator_inside_a_clinical_value_stays_in_its_cell(copy_of, capsys):
    centre = 4  # treatment_centre, a text column
    _edit_line(copy_of.parent / "clinical.tsv", 4,
               lambda line: "\t".join(f + "\u2028x" if i == centre else f for i, f in enumerate(line.split("\t"))))
    code, err = _check(copy_of.parent / "flow.toml", capsys)
    assert code == 0, err


def test_counts_near_the_float_limit_name_the_patient_without_library_warnings(copy_of, capsys):
    rna = copy_of.parent / "rna.tsv"
    for number in (2, 3):  # two features of 1e308: every patient's total passes the largest float
        _edit_line(rna, number, lambda line: "\t".join([line.split("\t")[0]] + ["1e308"] * line.count("\t")))
    patient = rna.read_text().split("\n")[0].split("\t")[1]
    code, err = _check(copy_of.parent / "flow.toml", capsys)
    assert code == 2 and len(err.splitlines()) == 1, err
    assert f"rna.tsv (modality 'rna'): patient '{patient}': found counts that add up past the largest number" in err


def test_a_modality_with_one_patient_says_so(copy_of, capsys):
    protein = copy_of.parent / "protein.tsv"
    header, *rows = protein.read_text().strip().split("\n")
    complete = next(row for row in rows if all(row.split("\t")))  # one patient with every protein measured
    protein.write_text(f"{header}\n{complete}\n")
    code, err = _check(copy_of.parent / "flow.toml", capsys)
    assert code == 2 and "protein.tsv (modality 'protein'): patients: found 1; expected at least 2 patients" in err, err


def test_a_gene_set_file_naming_no_measured_feature_is_refused_before_the_sweep(copy_of, capsys):
    flow = copy_of.parent / "flow.toml"
    (copy_of.parent / "sets.gmt").write_text("SET_A\tna\tNOT_MEASURED_1\tNOT_MEASURED_2\n")
    flow.write_text(flow.read_text().replace("[evaluation]", '[evaluation]\ngene_sets = "sets.gmt"'))
    code, err = _check(flow, capsys)
    assert code == 2 and f"{copy_of.parent / 'sets.gmt'} (for modality 'rna'): gene sets: no member" in err, err
    assert run(flow, copy_of.parent / "with_sets") == 2
    assert "NOT_MEASURED_1" in capsys.readouterr().err
    assert not list(copy_of.parent.glob("*with_sets*"))


def test_evaluate_lists_the_patients_it_leaves_out(copy_of, capsys):
    patients = [line.split("\t")[0] for line in (copy_of.parent / "clinical.tsv").read_text().split("\n")[1:61]]
    groups = copy_of.parent / "groups.tsv"
    groups.write_text("patient_id\tgroup\n" + "".join(f"{p}\t{'AB'[i % 2]}\n" for i, p in enumerate(patients))
                      + "NOBODY-1\tA\n")
    out = copy_of.parent / "evaluated"
    assert main(["evaluate", str(copy_of.parent / "flow.toml"), "--groups", str(groups), "--out", str(out)]) == 0
    assert "31 patients left out of the evaluation (30 without a group, 1 not analysis patients)" in capsys.readouterr().err
    left_out = pd.read_csv(out / "left_out_patients.tsv", sep="\t", comment="#")
    assert len(left_out) == 31 and "NOBODY-1" in set(left_out["patient_id"])
    assert not set(left_out["patient_id"]) & set(patients)


def test_messages_show_names_not_numpy_reprs(copy_of, capsys):
    assert main(["assign", str(copy_of), "--modality", f"rna={copy_of.parent / 'protein.tsv'}"]) == 2
    err = capsys.readouterr().err
    assert "expected features such as '" in err and "np.str_" not in err, err


def test_library_warnings_go_to_warnings_log_and_one_line(copy_of, capsys, monkeypatch):
    from strataweave.workflow import stages

    sweep = stages.run_sweep

    def warning_sweep(*args, **kwargs):
        for _ in range(3):
            warnings.warn("invalid value encountered in divide", RuntimeWarning)
        return sweep(*args, **kwargs)

    monkeypatch.setattr(stages, "run_sweep", warning_sweep)
    for entry in (copy_of / "stages").glob("sweep-*"):
        entry.unlink()
    assert main(["run", str(copy_of.parent / "flow.toml"), "--out", str(copy_of), "--overwrite"]) == 0
    err = capsys.readouterr().err
    assert "RuntimeWarning:" not in err and err.strip().splitlines()[-1].endswith(
        "; 3 library warnings (3 RuntimeWarning) written to warnings.log, not shown")
    log = (copy_of / "warnings.log").read_text()
    assert "3\tRuntimeWarning\tinvalid value encountered in divide\t" in log


def _gzip_cut(path: Path) -> None:
    data = gzip.compress(path.read_bytes())
    path.write_bytes(data[: len(data) // 2])


BAD_RNA = {
    "empty": lambda path: path.write_text(""),
    "header only": lambda path: path.write_text(path.read_text().split("\n")[0] + "\n"),
    "a patient twice": lambda path: path.write_text(
        "\n".join(line + "\t" + line.split("\t")[1] for line in path.read_text().strip().split("\n")) + "\n"),
    "a word among the counts": lambda path: _edit_line(path, 3, lambda line: line.replace("\t", "\tmany", 1)),
    "a negative count": lambda path: _edit_line(path, 3, lambda line: line.replace("\t", "\t-4", 1)),
    "a cut gzip stream": _gzip_cut,
}


@pytest.mark.parametrize("damage", list(BAD_RNA), ids=list(BAD_RNA))
def test_bad_input_exits_2_in_one_line_and_leaves_no_folder(copy_of, capsys, damage):
    BAD_RNA[damage](copy_of.parent / "rna.tsv")
    before = sorted(path.name for path in copy_of.parent.iterdir())
    assert run(copy_of.parent / "flow.toml", copy_of.parent / "new_run") == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "rna.tsv" in err, err
    assert sorted(path.name for path in copy_of.parent.iterdir()) == before


def test_a_second_run_into_a_busy_folder_exits_2_and_a_dead_holder_is_taken_over(copy_of, capsys):
    flow = copy_of.parent / "flow.toml"
    flow.write_text(flow.read_text().replace("n_resamples = 4", "n_resamples = 16"))
    out = copy_of.parent / "busy"
    command = [sys.executable, "-m", "strataweave.cli", "run", str(flow), "--out", str(out), "--quiet"]
    staging = copy_of.parent / ".busy.running"
    first = subprocess.Popen(command, stderr=subprocess.DEVNULL, start_new_session=True)
    try:
        while first.poll() is None and not list(staging.glob("stages/sweep-*.work/resample-*.json")):
            time.sleep(0.01)
        assert run(flow, out) == 2
        assert f"locked by PID {first.pid} started " in capsys.readouterr().err
    finally:
        os.killpg(first.pid, signal.SIGKILL)
        first.wait(timeout=60)
    assert main(["run", str(flow), "--out", str(out)]) == 0
    assert f"taking over the lock of PID {first.pid} " in capsys.readouterr().err
