"""Run a workflow into a run folder: stages with a cache, the manifest kept up to date, outputs last.

Running the same command again after an interruption resumes: finished stages are read
from `stages/`, the rest is computed, and the outputs are written from the same results,
so the tables come out byte for byte the same.
"""

from __future__ import annotations

import dataclasses
import shutil
import time
from pathlib import Path

import pandas as pd

from strataweave.caution import CAUTION
from strataweave.errors import InputError
from strataweave.files import sha256_file, write_table
from strataweave.seeding import run_seeds
from strataweave.workflow.cache import StageCache, stage_key
from strataweave.workflow.config import Workflow
from strataweave.workflow.evaluating import check_gene_sets
from strataweave.workflow.grouping import analysis_patients, left_out_patients
from strataweave.workflow.groups import read_groups
from strataweave.workflow.loading import check_columns
from strataweave.workflow.manifest import input_hashes, new_manifest, now_text
from strataweave.workflow.pipeline import Pipeline
from strataweave.workflow.preparing import normalised_views
from strataweave.workflow.progress import Feedback
from strataweave.workflow.run_folder import (
    LEFT_OUT, RunFolder, prepare_run_folder, publish, run_lock, seed_cache, start_staging,
)
from strataweave.workflow.warnings_log import collected_warnings, write_warnings_log

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
    from strataweave.workflow.outputs import write_outputs
    from strataweave.workflow.stages import build_stages

    folder.write_manifest(manifest)
    recorder = RunRecorder(folder, manifest, feedback)
    cache = StageCache(folder.stages)
    pipeline = Pipeline(build_stages(flow, hashes, seeds, feedback, groups), cache, recorder)

    check_columns(flow, pipeline.result("load")["clinical"])
    if flow.modalities:
        check_gene_sets(flow, normalised_views(pipeline.result("prepare")))
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
