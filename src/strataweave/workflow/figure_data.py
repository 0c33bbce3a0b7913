"""stages/figure_data.npz: the arrays the report draws, named as `strataweave.report.contract.ARRAYS`.

Per-patient arrays follow the reported grouping's patient order. Names never carry user
text: a modality is its position, a count its value, a survival group its position.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from strataweave.workflow.grouping import ReportedGrouping
from strataweave.workflow.modality_figures import factor_arrays, modality_map_arrays, volcano_arrays

MAX_CONSENSUS_SIDE = 600


def _consensus_arrays(sweep: dict) -> dict[str, np.ndarray]:
    """Each count's consensus ordered by its subtypes, evenly thinned to at most 600 patients."""
    arrays = {}
    for k in sweep["counts"]:
        codes = sweep["assignments"][k]["subtype"].to_numpy(dtype=np.int64)[sweep["consensus_patients"]]
        order = np.argsort(codes, kind="stable")
        if order.size > MAX_CONSENSUS_SIDE:
            order = order[np.unique(np.linspace(0, order.size - 1, MAX_CONSENSUS_SIDE).round().astype(np.int64))]
        arrays[f"consensus_k{k}"] = np.asarray(sweep["consensus"][k], dtype=np.float32)[np.ix_(order, order)]
        arrays[f"consensus_k{k}_codes"] = codes[order]
    return arrays


def _survival_arrays(summary: dict) -> dict[str, np.ndarray]:
    """Kaplan-Meier steps and bands per group (in survival.groups order) and numbers at risk."""
    km = summary["km"]
    by_group = {curve["group"]: curve for curve in km["curves"]}
    arrays = {}
    for g, name in enumerate(summary["groups"]):
        curve = by_group[name]
        for key in ("time", "survival", "lower", "upper"):
            arrays[f"km_{g}_{key}"] = np.asarray(curve[key], dtype=np.float64)
    arrays["km_at_risk_time"] = np.asarray(km["at_risk_time"], dtype=np.float64)
    arrays["km_at_risk"] = np.asarray(km["at_risk"], dtype=np.int64).reshape(len(summary["groups"]), -1)
    return arrays


def _marker_arrays(i: int, view: pd.DataFrame, rows: list[dict], grouping: ReportedGrouping) -> dict[str, np.ndarray]:
    """Heatmap block of one modality: top markers x measured patients ordered by subtype, rows scaled."""
    labels = grouping.labels
    measured = view.index[view.notna().any(axis=1) & view.index.isin(labels.index)]
    code_of = {name: code for code, name in enumerate(grouping.names)}
    patient_codes = labels.loc[measured].map(code_of).to_numpy(dtype=np.int64)
    order = np.argsort(patient_codes, kind="stable")
    features = [row["feature"] for row in rows]
    values = view.loc[measured[order], features].to_numpy(dtype=np.float64).T
    centre = values.mean(axis=1, keepdims=True) if values.size else values
    spread = values.std(axis=1, keepdims=True) if values.size else values
    scaled = np.divide(values - centre, spread, out=np.zeros_like(values), where=spread > 0)
    return {
        f"markers_{i}_values": scaled,
        f"markers_{i}_features": np.asarray(features, dtype=str),
        f"markers_{i}_feature_code": np.array([code_of[row["subtype"]] for row in rows], dtype=np.int64),
        f"markers_{i}_patient_code": patient_codes[order],
    }


def build_figure_data(
    stage_results: dict, results: dict, grouping: ReportedGrouping, views: dict[str, pd.DataFrame],
    show_patient_ids: bool,
) -> dict[str, np.ndarray]:
    """Every array the report reads for this run."""
    prepared = stage_results.get("prepare")
    n = len(grouping.patients)
    presence = (
        prepared["presence"].loc[grouping.patients].to_numpy(dtype=bool) if prepared is not None
        else np.zeros((n, 0), dtype=bool)
    )
    arrays = {
        "subtype_code": grouping.codes.astype(np.int64),
        "confidence": grouping.confidence.astype(np.float64),
        "core": grouping.core.astype(bool),
        "presence": presence,
    }
    if show_patient_ids:
        arrays["patient_ids"] = np.asarray(grouping.patients, dtype=str)
    if "graphs" in stage_results:
        positions = prepared["patients"].get_indexer(grouping.patients)
        arrays["embedding"] = np.asarray(stage_results["graphs"]["embedding"], dtype=np.float64)[positions]
    if "sweep" in stage_results:
        arrays.update(_consensus_arrays(stage_results["sweep"]))
    evaluation = stage_results["evaluate"]
    if "survival" in evaluation:
        arrays.update(_survival_arrays(evaluation["survival"]["summary"]))
    names = [row["name"] for row in results["cohort"]["modalities"]]
    if views:
        arrays.update(modality_map_arrays(names, views, grouping))
    if "final_fit" in stage_results:
        arrays.update(factor_arrays(names, stage_results["final_fit"]["model"], prepared["views"], grouping))
    markers = evaluation.get("markers") or {}
    for i, section in enumerate(results.get("markers", [])):
        arrays.update(_marker_arrays(i, views[section["modality"]], section["rows"], grouping))
        modality = section["modality"]
        arrays.update(volcano_arrays(i, markers["tables"][modality], markers["summary"][modality]["fdr"], grouping))
    return arrays
