"""results.json: every number the report shows, in the keys of `strataweave.report.contract`."""

from __future__ import annotations

import dataclasses

from strataweave.caution import CAUTION
from strataweave.data.qc import unmatched_counts
from strataweave.evaluate.result import plain
from strataweave.workflow.config import Workflow
from strataweave.workflow.evaluating import NOT_RUN
from strataweave.workflow.grouping import ReportedGrouping
from strataweave.workflow.sweeping import chosen_sweep


def parameters(flow: Workflow) -> dict:
    """The settings actually used, nested by workflow section (paths as text)."""
    sections = {
        name: dataclasses.asdict(getattr(flow, name))
        for name in ("graph", "factorization", "subtypes", "resampling", "evaluation")
    }
    sections["graph"]["rule"] = flow.graph.fusion
    return plain(
        {
            "seed": flow.seed,
            **sections,
            "modalities": [{"name": m.name, "weight": m.weight, **m.preprocessing()} for m in flow.modalities],
        }
    )


def _cohort(grouping: ReportedGrouping, prepared: dict | None, show_patient_ids: bool) -> dict:
    """Patients and modalities as analysed; patients of a matrix absent from the clinical table are counted.

    `unmatched` counts the left-out modality patients per modality and reason (a case-only
    twin of a clinical ID is reported, never merged); their IDs are listed only when the
    workflow allows patient IDs in the report.
    """
    section: dict = {"patients": len(grouping.patients), "modalities": []}
    if prepared is not None:
        measured = prepared["presence"].loc[grouping.patients]
        for row in prepared["qc"]:
            section["modalities"].append({**row, "patients": int(measured[row["name"]].sum())})
        section["left_out_not_in_clinical"] = prepared["dropped"]
        section["unmatched"] = unmatched_counts(prepared["unmatched"]).to_dict("records")
        if show_patient_ids:
            section["unmatched_patients"] = prepared["unmatched"].to_dict("records")
    return section


def _survival(part: dict, time_unit: str | None) -> dict:
    section = {key: value for key, value in part["summary"].items() if key != "km"}
    if time_unit is not None:
        section["time_unit"] = time_unit
    return section


def _markers(part: dict) -> list[dict]:
    return [
        {"modality": modality, "test": summary["test"], "patients": summary["n_patients"],
         "features": summary["n_features"], "rows": summary["rows"]}
        for modality, summary in part["summary"].items()
    ]


def _clinical(part: dict) -> list[dict]:
    return [{**row, "dropped": row.get("n_missing", 0)} for row in part["summary"]["variables"]]


def _not_run(flow: Workflow, stage_results: dict) -> dict[str, str]:
    """Each analysis left out, by the name of its section (or markers/<modality>), with the reason."""
    not_run = {}
    if "graphs" in stage_results and len(flow.modalities) < 2:
        not_run["graph_agreement"] = f"{NOT_RUN}one modality, so no pair of modality graphs to compare"
    return {**not_run, **stage_results["evaluate"]["not_run"]}


def build_results(
    flow: Workflow, stage_results: dict, grouping: ReportedGrouping, groups_given: bool
) -> dict:
    """The content of results.json for a run (`groups_given` False) or an evaluation of given groups."""
    prepared = stage_results.get("prepare")
    results: dict = {"caution": CAUTION, "subtype_count": len(grouping.names)}
    results["report"] = {
        "title": flow.report.title,
        "show_patient_ids": flow.report.show_patient_ids,
        "formats": list(flow.report.formats),
    }
    results["cohort"] = _cohort(grouping, prepared, flow.report.show_patient_ids)
    if "graphs" in stage_results:
        results["graph"] = stage_results["graphs"]["summary"]
    if groups_given:
        results["subtypes"] = {"labels": grouping.names, "sizes": grouping.sizes, "given": True}
    else:
        sections = chosen_sweep(stage_results["sweep"], stage_results["select"]).to_dict()
        results["selection"] = sections["selection"]
        results["subtypes"] = sections["subtypes"]
        results["baselines"] = sections["baselines"]
    evaluation = stage_results["evaluate"]
    results["not_run"] = _not_run(flow, stage_results)
    if "survival" in evaluation:
        results["survival"] = _survival(evaluation["survival"], flow.cohort.time_unit)
    if "clinical" in evaluation:
        results["clinical"] = _clinical(evaluation["clinical"])
        summary = evaluation["clinical"]["summary"]
        results["clinical_summary"] = {"groups": summary["groups"], "rows": summary["by_group"]}
    if "markers" in evaluation:
        results["markers"] = _markers(evaluation["markers"])
    if "enrichment" in evaluation:
        results["enrichment"] = evaluation["enrichment"]["summary"]["rows"]
        results["enrichment_summary"] = {
            key: value for key, value in evaluation["enrichment"]["summary"].items() if key != "rows"
        }
    results["parameters"] = parameters(flow)
    return plain(results)
