"""The last step of a run: tables, results.json, figure data, the saved model, then the report.

Everything here is written from the stage results alone, so a resumed run writes the same
bytes as an uninterrupted one. Tables carry the caution as a '# ' comment line.
"""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd

from strataweave.caution import CAUTION
from strataweave.files import atomic_write_arrays, atomic_write_text, write_table
from strataweave.report.contract import FIGURE_DATA_FILE, RESULTS_FILE, check_figure_data, check_results
from strataweave.workflow.config import Workflow
from strataweave.workflow.figure_data import build_figure_data
from strataweave.workflow.grouping import ReportedGrouping, analysis_patients, given_grouping, subtype_grouping
from strataweave.workflow.model_files import write_model
from strataweave.workflow.preparing import normalised_views
from strataweave.workflow.progress import Feedback
from strataweave.workflow.results import build_results
from strataweave.workflow.run_folder import RunFolder


def _table(frame: pd.DataFrame, path: Path) -> None:
    write_table(frame, path, comment=CAUTION)


def _assignments(grouping: ReportedGrouping) -> pd.DataFrame:
    table = pd.DataFrame({"patient_id": grouping.patients, "subtype": grouping.labels.to_numpy()})
    if grouping.scores is not None:
        table["confidence"] = grouping.confidence
        table["core"] = grouping.core
        for column in grouping.scores.columns:
            table[column] = grouping.scores[column].to_numpy()
    return table


def _survival_table(tables: dict[str, pd.DataFrame]) -> pd.DataFrame:
    """The survival tests and estimates in one long table, one block per part (no curves)."""
    parts = [frame.assign(part=name) for name, frame in tables.items() if name != "km" and not frame.empty]
    combined = pd.concat(parts, ignore_index=True)
    return combined[["part", *[c for c in combined.columns if c != "part"]]]


def write_tables(folder: Path, stage_results: dict, grouping: ReportedGrouping) -> None:
    """assignments, rank_selection, survival, clinical (+ clinical_summary), markers/<modality>, enrichment
    (+ enrichment_rank_test) (.tsv), each when it ran."""
    _table(_assignments(grouping), folder / "assignments.tsv")
    if "sweep" in stage_results:
        _table(stage_results["sweep"]["criteria"].reset_index(), folder / "rank_selection.tsv")
    evaluation = stage_results["evaluate"]
    if "survival" in evaluation:
        _table(_survival_table(evaluation["survival"]["tables"]), folder / "survival.tsv")
    if "clinical" in evaluation:
        _table(evaluation["clinical"]["tables"]["association"], folder / "clinical.tsv")
        _table(evaluation["clinical"]["tables"]["by_group"], folder / "clinical_summary.tsv")
    for modality, frame in evaluation.get("markers", {}).get("tables", {}).items():
        _table(frame.rename(columns={"group": "subtype"}), folder / "markers" / f"{modality}.tsv")
    if "enrichment" in evaluation:
        for name, path in (("over_representation", "enrichment.tsv"), ("rank_test", "enrichment_rank_test.tsv")):
            table = evaluation["enrichment"]["tables"][name]
            _table(table.rename(columns={"group": "subtype", "set": "gene_set"}), folder / path)


def reported_grouping(stage_results: dict) -> ReportedGrouping:
    """The subtypes of a run, or the given groups of an evaluation."""
    if "final_fit" in stage_results:
        return subtype_grouping(stage_results["final_fit"])
    evaluation = stage_results["evaluate"]
    patients = analysis_patients(stage_results["load"], stage_results.get("prepare"))
    return given_grouping(evaluation["labels"], patients)


def render_report(run_dir: Path, formats, feedback: Feedback | None = None) -> None:
    """Figures, report.html and slides.pdf from the run folder (the report layer reads only files)."""
    from strataweave.report.render import render_run

    feedback = feedback or Feedback()
    with feedback.bar("report", None) as progress:
        render_run(run_dir, formats=formats, progress=progress)


def write_outputs(folder: RunFolder, flow: Workflow, stage_results: dict, manifest: dict, feedback: Feedback) -> str:
    """Write every output of the run folder; returns a one-line summary of the run (without its path)."""
    grouping = reported_grouping(stage_results)
    groups_given = "final_fit" not in stage_results
    results = build_results(flow, stage_results, grouping, groups_given)
    prepared = stage_results.get("prepare")
    views = normalised_views(prepared) if prepared is not None else {}
    arrays = build_figure_data(stage_results, results, grouping, views, flow.report.show_patient_ids)
    check_results(results)
    check_figure_data(arrays, results)

    folder.clear_outputs()
    write_tables(folder.path, stage_results, grouping)
    if not groups_given:
        write_model(folder.path / "model", flow, prepared, stage_results["final_fit"])
    atomic_write_arrays(folder.path / FIGURE_DATA_FILE, arrays)
    atomic_write_text(folder.path / RESULTS_FILE, json.dumps(results, indent=1, allow_nan=False) + "\n")
    folder.write_manifest(manifest)
    if flow.report.formats:
        render_report(folder.path, flow.report.formats, feedback)

    sizes = ", ".join(f"{name}: {size}" for name, size in zip(grouping.names, grouping.sizes))
    what = "groups evaluated" if groups_given else "subtypes"
    extra = ""
    if "selection" in results:
        extra = f" (recommended {results['selection']['recommended']})"
    return f"{len(grouping.names)} {what}{extra} ({sizes}); research use only"
