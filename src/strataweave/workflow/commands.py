"""The command-line verbs, each from its parsed arguments to its files, its summary and its exit code.

A verb takes its parsed arguments, writes its files and says a short summary: `run` and
`evaluate` run a workflow's stages into a run folder, `check` reads and prepares the inputs
only, `assign` places new patients with a finished run's model, `compare` sets the subtypes
of two finished runs side by side, `report` draws a run's report again, `synth` writes an
invented cohort. Only this module and `cli.py` print to standard output; messages and bars
go to stderr through `Feedback`.

Sections: the verbs; running a workflow into a run folder; check; assign; compare; the
faults that are not the program's.
"""

from __future__ import annotations

import argparse
import dataclasses
import errno
import json
import re
import shutil
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
from joblib.externals.loky.process_executor import TerminatedWorkerError

from strataweave.caution import CAUTION
from strataweave.data.cohort import Cohort
from strataweave.data.qc import presence_patterns, qc_summary
from strataweave.data.readers import read_groups, read_matrix
from strataweave.data.synthetic import write_synthetic_cohort
from strataweave.errors import InputError
from strataweave.files import atomic_write_text, guarded, sha256_file, write_table
from strataweave.report.comparison_view import ComparisonView
from strataweave.report.contract import COMPARISON_FIGURE, COMPARISON_PAGE, RESULTS_FILE
from strataweave.seeding import run_seeds
from strataweave.subtypes.compare import compare_partitions, split_flow
from strataweave.subtypes.model import ModelModality, SubtypeModel
from strataweave.workflow.cache import Pipeline, StageCache, stage_key
from strataweave.workflow.config import Workflow, load_workflow
from strataweave.workflow.outputs import render_report, write_outputs
from strataweave.workflow.progress import Feedback
from strataweave.workflow.run_folder import (
    LEFT_OUT,
    RunFolder,
    check_new_file,
    collected_warnings,
    finished_run,
    input_hashes,
    new_manifest,
    now_text,
    prepare_run_folder,
    publish,
    run_lock,
    seed_cache,
    start_staging,
    write_warnings_log,
)
from strataweave.workflow.stages import (
    analysis_patients,
    build_cohort,
    build_stages,
    check_columns,
    check_gene_sets,
    left_out_patients,
    load_inputs,
)


# ---------------------------------------------------------------------------------------------
# The verbs
# ---------------------------------------------------------------------------------------------

def _default_out(*parts: str) -> Path:
    return Path("runs") / "_".join(parts)


def run_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    flow = load_workflow(args.workflow).with_overrides(seed=args.seed, jobs=args.jobs)
    out = args.out or _default_out(args.workflow.stem)
    summary = run_workflow(flow, out, argv=["strataweave", *argv], feedback=feedback, overwrite=args.overwrite)
    feedback.say(summary)
    return 0


def evaluate_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    flow = load_workflow(args.workflow, require_modalities=False).with_overrides(seed=args.seed)
    out = args.out or _default_out(args.workflow.stem, args.groups.stem)
    summary = run_workflow(
        flow, out, argv=["strataweave", *argv], feedback=feedback, overwrite=args.overwrite, groups_file=args.groups
    )
    feedback.say(summary)
    return 0


def check_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    print(check_inputs(args.workflow))
    return 0


def assign_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    if args.out is not None:
        check_table_out(args.out, args.run_dir, dict(args.modality), force=args.force)
    table = assign_new_patients(args.run_dir, dict(args.modality))
    if args.out is None:
        print(f"# {CAUTION}")
        guarded(table).to_csv(sys.stdout, sep="\t", index=False, float_format="%.6g", lineterminator="\n")
    else:
        write_table(table, args.out, comment=CAUTION)
        feedback.say(f"assigned {len(table)} patients: {args.out}")
    return 0


def compare_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    summary = compare_runs(args.run_a, args.run_b, args.out, force=args.force)
    print(summary)
    return 0


def report_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    folder = finished_run(args.run_dir)
    try:
        results = json.loads((folder.path / RESULTS_FILE).read_text(encoding="utf-8"))
        formats = results["report"]["formats"] or ["html", "pdf"]  # asked for now, even if the run wrote none
    except (OSError, ValueError, KeyError, TypeError):
        formats = ["html", "pdf"]
    render_report(folder.path, formats, feedback)
    feedback.say(f"report rendered: {folder.path}")
    return 0


def synth_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    written = write_synthetic_cohort(args.out_dir, n_patients=args.patients, seed=args.seed)
    feedback.say(f"wrote {len(written)} files of an invented cohort into {args.out_dir}")
    return 0


# ---------------------------------------------------------------------------------------------
# Run a workflow into a run folder: stages with a cache, the manifest kept up to date, outputs last.
#
# Running the same command again after an interruption resumes: finished stages are read
# from `stages/`, the rest is computed, and the outputs are written from the same results,
# so the tables come out byte for byte the same.
# ---------------------------------------------------------------------------------------------

class RunRecorder:
    """Keeps manifest.json current as stages start and finish, and tells the user."""

    def __init__(self, folder: RunFolder, manifest: dict, feedback: Feedback) -> None:
        self.folder, self.manifest, self.feedback = folder, manifest, feedback

    def stage_started(self, name: str, cached: bool) -> None:
        self.manifest["current_stage"] = name
        self.folder.write_manifest(self.manifest)
        self.feedback.detail(f"{name}: {'reading the cached result' if cached else 'running'}")

    def stage_finished(self, name: str, key: str, seconds: float, cached: bool) -> None:
        self.manifest["stages"][name] = {"key": key[:16], "seconds": round(seconds, 3), "cached": cached}
        self.manifest["current_stage"] = None
        self.folder.write_manifest(self.manifest)
        self.feedback.detail(f"{name}: done in {seconds:.2f} s{' (cached)' if cached else ''}")

    def notice(self, message: str) -> None:
        self.feedback.say(message)


def run_workflow(
    flow: Workflow,
    out: str | Path,
    argv: list[str],
    feedback: Feedback | None = None,
    overwrite: bool = False,
    groups_file: Path | None = None,
) -> str:
    """Run every stage of `flow` into the run folder `out`; returns a one-line summary.

    With `groups_file` (a grouping the user brings) the run evaluates that grouping instead
    of finding subtypes: load, prepare (when there are modalities), evaluate, report.
    """
    feedback = feedback or Feedback()
    folder = prepare_run_folder(out, overwrite=overwrite)
    out = Path(out).expanduser().resolve()
    groups = read_groups(groups_file) if groups_file is not None else None
    hashes = input_hashes(flow)
    seeds = run_seeds(flow.seed)
    manifest = new_manifest(flow, "evaluate" if groups is not None else "run", argv, hashes, seeds)
    if groups_file is not None:
        hashes["groups"] = sha256_file(groups_file)
        manifest["inputs"][str(Path(groups_file).resolve())] = hashes["groups"]
    created = start_staging(folder)
    try:
        with run_lock(folder, feedback.say):
            if created is not None:
                seed_cache(folder, out)
            with collected_warnings() as caught:
                summary = _run_stages(flow, folder, manifest, hashes, seeds, feedback, groups)
            told = write_warnings_log(folder.path, caught)
            publish(folder, out)
    except InputError:
        if created is not None:  # bad input: leave nothing behind (a resumed run keeps its cache)
            shutil.rmtree(created, ignore_errors=True)
        raise
    return f"{out}: {summary}" + (f"; {told}" if told else "")


def _run_stages(flow: Workflow, folder: RunFolder, manifest: dict, hashes: dict, seeds: dict,
                feedback: Feedback, groups: object) -> str:
    """Every stage and the outputs, into the staging folder; the manifest ends 'finished'."""
    folder.write_manifest(manifest)
    recorder = RunRecorder(folder, manifest, feedback)
    cache = StageCache(folder.stages)
    pipeline = Pipeline(build_stages(flow, hashes, seeds, feedback, groups), cache, recorder)

    check_columns(flow, pipeline.result("load")["clinical"])
    if flow.modalities:
        check_gene_sets(flow, pipeline.result("prepare").normalised_views)
    results = {name: pipeline.result(name) for name in pipeline.stages}
    recorder.stage_started("report", cached=False)
    start = time.perf_counter()
    summary = write_outputs(folder, flow, results, manifest, feedback)
    report_key = stage_key("report", dataclasses.asdict(flow.report), pipeline.keys)  # recorded, never cached
    recorder.stage_finished("report", report_key, time.perf_counter() - start, cached=False)

    if groups is not None:
        summary += _left_out_note(folder, groups, analysis_patients(results["load"], results.get("prepare")))
    cache.prune(pipeline.keys)
    manifest.update(status="finished", finished=now_text(), current_stage=None)
    folder.write_manifest(manifest)
    return summary


def _left_out_note(folder: RunFolder, groups: pd.Series, patients: pd.Index) -> str:
    """'; N patients left out ...' with their IDs and reasons written to left_out_patients.tsv; '' if none."""
    table = left_out_patients(groups, patients)
    if table.empty:
        return ""
    write_table(table, folder.path / LEFT_OUT, comment=CAUTION)
    no_group = int(table["reason"].str.startswith("no group").sum())
    return (f"; {len(table)} patients left out of the evaluation ({no_group} without a group, "
            f"{len(table) - no_group} not analysis patients), listed in {LEFT_OUT}")


# ---------------------------------------------------------------------------------------------
# `strataweave check`: validate a workflow, read and prepare its inputs, print QC; no graph, no model.
# ---------------------------------------------------------------------------------------------

#: Left-out patients listed one by one in the check report; beyond this, only the count.
UNMATCHED_SHOWN = 20


def _qc_table(cohort: Cohort) -> pd.DataFrame:
    """One row per modality: patients, left out, features in the file, after each filter, used; missing share."""
    table = qc_summary(cohort).drop(columns="source")
    return table.assign(missing_fraction=table["missing_fraction"].round(4))


def _unmatched_lines(unmatched: pd.DataFrame) -> list[str]:
    """The modality patients left out of the analysis (not merged), with the reason of each."""
    if unmatched.empty:
        return []
    lines = ["", f"modality patients left out of the analysis (not merged): {len(unmatched)}",
             unmatched.head(UNMATCHED_SHOWN).to_string(index=False)]
    if len(unmatched) > UNMATCHED_SHOWN:
        lines.append(f"... and {len(unmatched) - UNMATCHED_SHOWN} more")
    return lines


def check_inputs(path: str | Path) -> str:
    """The report `strataweave check` prints: a summary line, then QC tables of the prepared inputs."""
    flow = load_workflow(path, require_modalities=False)
    loaded = load_inputs(flow)
    clinical = loaded["clinical"]
    check_columns(flow, clinical)
    survival = f"survival: {flow.cohort.time_column}/{flow.cohort.event_column}" if flow.has_survival else "no survival"
    lines = [
        f"{flow.source.name}: valid; {len(clinical)} patients in {flow.cohort.clinical.name}, "
        f"{len(flow.modalities)} modalities, {survival}, subtype counts {list(flow.subtypes.counts)}"
    ]
    if flow.modalities:
        cohort = build_cohort(flow, loaded)
        check_gene_sets(flow, cohort.normalised_views())
        lines += [
            f"patients in the analysis (clinical and at least one modality): {len(cohort.patients)}",
            "", _qc_table(cohort).to_string(), "", presence_patterns(cohort).to_string(index=False),
            *_unmatched_lines(cohort.unmatched),
        ]
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------
# `strataweave assign`: newly profiled patients placed into the subtypes of a finished run.
#
# The files are read as the run read its own (kind, orientation); the run's saved
# `SubtypeModel` does the rest (see `strataweave.subtypes.model`).
# ---------------------------------------------------------------------------------------------

def _read_new_matrix(path: Path, modality: ModelModality, features: np.ndarray) -> pd.DataFrame:
    """Patients x features of one new file; an omitted orientation is told by the training features."""
    orientation = modality.orientation or "samples_in_rows"
    frame = read_matrix(path, orientation=orientation, name=modality.name, kind=modality.kind)
    if modality.orientation is None:
        in_columns = int(frame.columns.isin(features).sum())
        in_rows = int(frame.index.isin(features).sum())
        if in_rows > in_columns:
            frame = frame.T.rename_axis(index="patient_id", columns="feature")
    if not frame.columns.isin(features).any():
        raise InputError(
            f"{path} (modality {modality.name!r}): found no feature of the run's {modality.name!r} data "
            f"(first: {frame.columns[0]!r}), expected features such as {features[0]!r}"
        )
    return frame


def assign_new_patients(run_dir: str | Path, files: dict[str, str | Path]) -> pd.DataFrame:
    """One row per new patient: patient_id, subtype, confidence, score per subtype, modalities, far flag."""
    folder = finished_run(run_dir)
    model = SubtypeModel.load(folder.path / "model")
    known = [m.name for m in model.modalities_]
    for name in files:
        if name not in known:
            raise InputError(f"--modality {name}=...: found modality {name!r}, expected one of the run's: {', '.join(known)}")
    raw = {
        m.name: _read_new_matrix(Path(files[m.name]), m, m.preprocessor.input_features_)
        for m in model.modalities_ if m.name in files
    }
    return model.predict(raw, sources={name: str(path) for name, path in files.items()}).reset_index()


def check_table_out(out: Path, run_dir: str | Path, files: dict[str, str | Path], force: bool = False) -> None:
    """Refuse an `--out` that is an input (of this command or of the run), a file of a finished run, or
    (without `force`) an existing file."""
    manifest = finished_run(run_dir).read_manifest()
    check_new_file(out, [*files.values(), *manifest.get("inputs", {}), manifest.get("workflow", {}).get("path", "")], force)


# ---------------------------------------------------------------------------------------------
# `strataweave compare`: how the subtypes of two finished runs agree (ARI, NMI, contingency, flow), as
# tables, a figure and an HTML page.
# ---------------------------------------------------------------------------------------------

COMPARISON_FILES = ("comparison.json", "contingency.tsv", "flow.tsv", COMPARISON_PAGE, f"{COMPARISON_FIGURE}.png",
                    f"{COMPARISON_FIGURE}.svg")


def read_assignments(run_dir: str | Path) -> pd.Series:
    """Subtype per patient from a finished run's assignments.tsv."""
    path = finished_run(run_dir).path / "assignments.tsv"
    try:
        table = pd.read_csv(path, sep="\t", comment="#", dtype={"patient_id": str, "subtype": str})
    except (OSError, ValueError) as problem:
        raise InputError(f"{path}: not readable ({problem}), expected the run's assignments table") from None
    if not {"patient_id", "subtype"} <= set(table.columns):
        raise InputError(f"{path}: header {list(table.columns)[:4]}, expected columns patient_id and subtype")
    return table.set_index("patient_id")["subtype"]


def compare_runs(run_a: str | Path, run_b: str | Path, out: str | Path | None = None, force: bool = False) -> str:
    """A printable summary; with `out`, comparison.json, contingency.tsv, flow.tsv, the figure and the page
    written there (existing ones replaced only with `force`, never inside a finished run)."""
    if out is not None:
        for name in COMPARISON_FILES:
            check_new_file(Path(out) / name, [], force)
    a, b = read_assignments(run_a), read_assignments(run_b)
    comparison = compare_partitions(a, b)
    flow = split_flow(a, b)
    contingency = comparison.contingency.rename_axis(index="subtype_a", columns="subtype_b")
    if out is not None:
        out = Path(out)
        summary = {"caution": CAUTION, "run_a": str(Path(run_a).resolve()), "run_b": str(Path(run_b).resolve()),
                   **comparison.to_dict()}
        atomic_write_text(out / COMPARISON_FILES[0], json.dumps(summary, indent=1) + "\n")
        write_table(contingency.reset_index(), out / COMPARISON_FILES[1], comment=CAUTION)
        write_table(flow, out / COMPARISON_FILES[2], comment=CAUTION)
        from strataweave.report.render import render_comparison  # the plotting stack only when drawing

        names = Path(run_a).resolve().name, Path(run_b).resolve().name
        render_comparison(out, ComparisonView(*names, comparison.contingency, comparison.ari, comparison.nmi,
                                              comparison.n_patients, CAUTION))
    return (
        f"ARI {comparison.ari:.3f}, NMI {comparison.nmi:.3f} over {comparison.n_patients} shared patients "
        f"(rows: {Path(run_a).name}, columns: {Path(run_b).name})\n{contingency.to_string()}"
    )


# ---------------------------------------------------------------------------------------------
# Errors that are not the program's fault, each told in one line with the exit code it earns.
#
# 2: bad input or a bad path (an InputError; a path the system refuses: missing, not a folder,
#    a loop of symbolic links, a name too long).
# 3: a fault of the machine (disk or quota full, a file past the size limit, a read-only file
#    system or folder, an input/output error, memory exhausted). Files are written under a
#    temporary name and renamed, and a run is built beside its `--out` and resumes from its
#    finished stages, so such a stop loses nothing.
# Anything else is a fault of the program (exit 1, told by the CLI).
# ---------------------------------------------------------------------------------------------

BAD_PATH = {errno.ENOENT, errno.ENOTDIR, errno.EISDIR, errno.ELOOP, errno.ENAMETOOLONG}
MACHINE = {
    errno.ENOSPC: "the disk is full",
    errno.EDQUOT: "the disk quota is used up",
    errno.EFBIG: "a file reached the file-size limit",
    errno.EROFS: "the file system is read-only",
    errno.EACCES: "no permission to write there (a read-only folder?)",
    errno.EPERM: "the operation is not permitted there",
    errno.EIO: "the disk reported an input/output error",
    errno.ENOMEM: "out of memory",
}
NOTHING_LOST = ("nothing was lost: inputs and finished runs are untouched and no file is half-written; "
                "run the same command again to resume from the finished stages")
LOOP = "Symlink loop from "  # how pathlib names a link loop before Python 3.13
NUMPY_SCALAR = re.compile(r"np\.(?:str_|bytes_|bool_?|u?int\d*|float\d*)\(([^()]*)\)")  # repr of NumPy >= 2


def plain_line(text: str) -> str:
    """`text` on one line, NumPy scalars shown as their values ('G1', not np.str_('G1'))."""
    return NUMPY_SCALAR.sub(r"\1", " ".join(text.split()))


def known_fault(error: BaseException) -> tuple[int, str] | None:
    """(exit code, one-line message) of bad input, a bad path or a fault of the machine; None otherwise."""
    if isinstance(error, InputError):
        return 2, plain_line(str(error))
    if isinstance(error, MemoryError):
        return 3, f"out of memory; {NOTHING_LOST}"
    if isinstance(error, TerminatedWorkerError):
        return 3, f"a worker process was killed (most often: out of memory); {NOTHING_LOST}"
    if isinstance(error, RuntimeError) and str(error).startswith(LOOP):
        return 2, f"{str(error)[len(LOOP):].strip(chr(39))}: a loop of symbolic links, expected a path to a file or folder"
    if isinstance(error, OSError) and error.errno in MACHINE:
        where = f" at {error.filename}" if error.filename else ""
        return 3, f"{MACHINE[error.errno]}{where}; {NOTHING_LOST}"
    if isinstance(error, OSError) and error.errno in BAD_PATH:
        return 2, f"{error.filename}: {error.strerror}, expected a path to an existing file or folder"
    return None
