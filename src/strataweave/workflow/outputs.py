"""What a run writes from its stage results: tables, results.json, figure data, model/, then the report.

Everything here is written from the stage results alone, so a resumed run writes the same
bytes as an uninterrupted one. Tables carry the caution as a '# ' comment line.

Sections: the tables and the order of writing; results.json; stages/figure_data.npz and
its per-modality arrays; model/.
"""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.decomposition import PCA
from sklearn.metrics import silhouette_samples

from strataweave.caution import CAUTION
from strataweave.data.qc import unmatched_counts
from strataweave.data.scaling import NEGATIVE_SUFFIX, POSITIVE_SUFFIX
from strataweave.evaluate.result import plain
from strataweave.factorize import JointNMF
from strataweave.files import atomic_write_arrays, atomic_write_text, write_table
from strataweave.report.contract import FIGURE_DATA_FILE, RESULTS_FILE, check_figure_data, check_results
from strataweave.subtypes.model import ModelModality, SubtypeModel
from strataweave.subtypes.result import SweepResult
from strataweave.workflow.config import Workflow
from strataweave.workflow.progress import Feedback
from strataweave.workflow.run_folder import RunFolder
from strataweave.workflow.stages import (
    NOT_RUN,
    FinalFit,
    PreparedCohort,
    ReportedGrouping,
    analysis_patients,
    chosen_sweep,
    given_grouping,
    subtype_grouping,
)

# ---------------------------------------------------------------------------------------------
# The tables, and every output written in order
# ---------------------------------------------------------------------------------------------

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
        _table(stage_results["sweep"].criteria.reset_index(), folder / "rank_selection.tsv")
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
    views = prepared.normalised_views if prepared is not None else {}
    arrays = build_figure_data(stage_results, results, grouping, views, flow.report.show_patient_ids)
    check_results(results)
    check_figure_data(arrays, results)

    folder.clear_outputs()
    write_tables(folder.path, stage_results, grouping)
    if not groups_given:
        write_model(folder.path / "model", flow, prepared, stage_results["sweep"], stage_results["final_fit"])
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


# ---------------------------------------------------------------------------------------------
# results.json: every number the report shows, in the keys of `strataweave.report.contract`.
# ---------------------------------------------------------------------------------------------

def parameters(flow: Workflow) -> dict:
    """The settings actually used, nested by workflow section (paths as text)."""
    sections = {
        name: dataclasses.asdict(getattr(flow, name))
        for name in ("graph", "factorization", "subtypes", "resampling", "evaluation")
    }
    return plain(
        {
            "seed": flow.seed,
            **sections,
            "modalities": [{"name": m.name, "weight": m.weight, **m.preprocessing()} for m in flow.modalities],
        }
    )


def _cohort(grouping: ReportedGrouping, prepared: PreparedCohort | None, show_patient_ids: bool) -> dict:
    """Patients and modalities as analysed; patients of a matrix absent from the clinical table are counted.

    `unmatched` counts the left-out modality patients per modality and reason (a case-only
    twin of a clinical ID is reported, never merged); their IDs are listed only when the
    workflow allows patient IDs in the report.
    """
    section: dict = {"patients": len(grouping.patients), "modalities": []}
    if prepared is not None:
        measured = prepared.presence.loc[grouping.patients]
        for row in prepared.qc:
            section["modalities"].append({**row, "patients": int(measured[row["name"]].sum())})
        section["left_out_not_in_clinical"] = prepared.dropped
        section["unmatched"] = unmatched_counts(prepared.unmatched).to_dict("records")
        if show_patient_ids:
            section["unmatched_patients"] = prepared.unmatched.to_dict("records")
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
        results["graph"] = stage_results["graphs"].summary
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


# ---------------------------------------------------------------------------------------------
# stages/figure_data.npz: the arrays the report draws, named as `strataweave.report.contract.ARRAYS`.
#
# Per-patient arrays follow the reported grouping's patient order. Names never carry user
# text: a modality is its position, a count its value, a survival group its position.
# ---------------------------------------------------------------------------------------------

MAX_CONSENSUS_SIDE = 600


def _consensus_arrays(sweep: SweepResult) -> dict[str, np.ndarray]:
    """Each count's consensus ordered by its subtypes, evenly thinned to at most 600 patients."""
    arrays = {}
    for k in sweep.counts:
        codes = sweep.assignments[k]["subtype"].to_numpy(dtype=np.int64)[sweep.consensus_patients]
        order = np.argsort(codes, kind="stable")
        if order.size > MAX_CONSENSUS_SIDE:
            order = order[np.unique(np.linspace(0, order.size - 1, MAX_CONSENSUS_SIDE).round().astype(np.int64))]
        arrays[f"consensus_k{k}"] = np.asarray(sweep.consensus[k], dtype=np.float32)[np.ix_(order, order)]
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
    measured, patient_codes = _measured_patients(view, grouping)
    code_of = {name: code for code, name in enumerate(grouping.names)}
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
        prepared.presence.loc[grouping.patients].to_numpy(dtype=bool) if prepared is not None
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
        positions = prepared.patients.get_indexer(grouping.patients)
        arrays["embedding"] = np.asarray(stage_results["graphs"].embedding, dtype=np.float64)[positions]
    if "sweep" in stage_results:
        arrays.update(_consensus_arrays(stage_results["sweep"]))
    evaluation = stage_results["evaluate"]
    if "survival" in evaluation:
        arrays.update(_survival_arrays(evaluation["survival"]["summary"]))
    names = [row["name"] for row in results["cohort"]["modalities"]]
    if views:
        arrays.update(modality_map_arrays(names, views, grouping))
    if "final_fit" in stage_results:
        model = stage_results["sweep"].models[stage_results["final_fit"].count]
        arrays.update(factor_arrays(names, model, prepared.views, grouping))
    markers = evaluation.get("markers") or {}
    for i, section in enumerate(results.get("markers", [])):
        arrays.update(_marker_arrays(i, views[section["modality"]], section["rows"], grouping))
        modality = section["modality"]
        arrays.update(volcano_arrays(i, markers["tables"][modality], markers["summary"][modality]["fdr"], grouping))
    return arrays


# ---------------------------------------------------------------------------------------------
# The per-modality views of the figure data.
#
# Each omics layer on its own: a 2-D map of its patients and how well it keeps each subtype apart
# (which layer separates which subtypes); the share of each factor every modality holds and each
# factor's top loadings (what the joint model took from where); every feature's marker test for the
# volcano plots. A modality is its position in cohort.modalities, a marker block its position in markers.
# ---------------------------------------------------------------------------------------------

MIN_PATIENTS = 3  # a map of fewer patients shows nothing
MAX_SEPARATION_PATIENTS = 2000  # silhouettes cost patients squared: larger layers are evenly thinned
SEPARATION_COMPONENTS = 10  # silhouettes are measured on this many principal components
TOP_LOADINGS = 8


def _measured_patients(view: pd.DataFrame, grouping: ReportedGrouping) -> tuple[pd.Index, np.ndarray]:
    """The grouped patients with any value in `view`, in its row order, and their subtype codes."""
    measured = view.index[view.notna().any(axis=1) & view.index.isin(grouping.patients)]
    codes = pd.Series(grouping.codes, index=grouping.patients).loc[measured].to_numpy(dtype=np.int64)
    return measured, codes


def _measured(view: pd.DataFrame, grouping: ReportedGrouping) -> tuple[np.ndarray, np.ndarray]:
    """Values (missing cells at the feature mean) and subtype codes of the grouped patients measured here."""
    measured, codes = _measured_patients(view, grouping)
    rows = view.loc[measured]
    values = rows.fillna(rows.mean()).fillna(0.0).to_numpy(dtype=np.float64)
    return values, codes


def _separation(components: np.ndarray, codes: np.ndarray, n_subtypes: int) -> np.ndarray:
    """Mean silhouette of each subtype's patients (scikit-learn), NaN for a subtype with none measured."""
    keep = np.unique(np.linspace(0, codes.size - 1, min(codes.size, MAX_SEPARATION_PATIENTS)).round().astype(np.int64))
    points, kept = components[keep], codes[keep]
    result = np.full(n_subtypes, np.nan)
    if not 2 <= np.unique(kept).size < kept.size:
        return result
    widths = silhouette_samples(points, kept)
    sizes = np.bincount(kept, minlength=n_subtypes)
    present = sizes > 0
    result[present] = np.bincount(kept, weights=widths, minlength=n_subtypes)[present] / sizes[present]
    return result


def modality_map_arrays(names: list[str], views: dict[str, pd.DataFrame], grouping: ReportedGrouping) -> dict:
    """Per modality with at least MIN_PATIENTS patients and two features: its first two principal components,
    their codes and shares of variance; for all modalities, each subtype's mean silhouette (M x K)."""
    arrays: dict[str, np.ndarray] = {}
    separation = np.full((len(names), len(grouping.names)), np.nan)
    for m, name in enumerate(names):
        values, codes = _measured(views[name], grouping)
        if codes.size < MIN_PATIENTS or values.shape[1] < 2:
            continue
        pca = PCA(n_components=min(SEPARATION_COMPONENTS, *values.shape), random_state=0)
        components = pca.fit_transform(values)
        arrays[f"modality_{m}_map"] = components[:, :2]
        arrays[f"modality_{m}_map_codes"] = codes
        arrays[f"modality_{m}_map_variance"] = pca.explained_variance_ratio_[:2].astype(np.float64)
        separation[m] = _separation(components, codes, len(grouping.names))
    arrays["modality_separation"] = separation
    return arrays


def _display_names(features: pd.Index) -> np.ndarray:
    """Feature names of the factorisation's columns, a sign-split column as 'name +' or 'name -'."""
    text = pd.Series(features.astype(str))
    for suffix, mark in ((POSITIVE_SUFFIX, " +"), (NEGATIVE_SUFFIX, " -")):
        split = text.str.endswith(suffix)
        text[split] = text[split].str[: -len(suffix)] + mark
    return text.to_numpy(dtype=str)


def factor_arrays(names: list[str], model: JointNMF, factor_views: dict[str, pd.DataFrame],
                  grouping: ReportedGrouping) -> dict[str, np.ndarray]:
    """Share of each factor's loading held by each modality (M x r, columns sum to 1), the top loadings of each
    factor across modalities, and the mean patient factor of each subtype (K x r)."""
    # sum_v alpha_v ||H_v[k]||^2 = 1 (JointNMF's scaling), so alpha_v H_v[k, f]^2 is feature f's share of factor k
    shares = [weight * np.square(loadings) for weight, loadings in zip(model.modality_weights_, model.components_)]
    row_of = [names.index(name) for name in model.view_names_]
    contribution = np.zeros((len(names), shares[0].shape[0]))
    contribution[row_of] = np.stack([share.sum(axis=1) for share in shares])
    contribution /= np.where(contribution.sum(axis=0) > 0, contribution.sum(axis=0), 1.0)
    stacked = np.concatenate(shares, axis=1)
    every = stacked / np.maximum(stacked.sum(axis=1, keepdims=True), 1e-300)
    features = np.concatenate([_display_names(factor_views[name].columns) for name in model.view_names_])
    modality = np.concatenate([np.full(share.shape[1], row) for share, row in zip(shares, row_of)])
    top = np.argsort(-every, axis=1, kind="stable")[:, :TOP_LOADINGS]
    patient_factor = np.asarray(model.patient_factor_, dtype=np.float64)
    membership = np.eye(len(grouping.names))[grouping.codes]
    return {
        "factor_contribution": contribution,
        "factor_top_share": np.take_along_axis(every, top, axis=1),
        "factor_top_feature": features[top],
        "factor_top_modality": modality[top].astype(np.int64),
        "factor_subtype_mean": membership.T @ patient_factor / np.maximum(membership.sum(axis=0), 1)[:, None],
    }


def volcano_arrays(i: int, table: pd.DataFrame, fdr: float, grouping: ReportedGrouping) -> dict[str, np.ndarray]:
    """Every feature's difference of means and p of marker block `i`, subtypes (rows) x features (columns)."""
    features = pd.Index(pd.unique(table["feature"]))
    rows = table["group"].astype(str).map({name: code for code, name in enumerate(grouping.names)}).to_numpy()
    columns = features.get_indexer(table["feature"])

    def grid(column: str) -> np.ndarray:
        values = np.full((len(grouping.names), len(features)), np.nan)
        values[rows, columns] = table[column].to_numpy(dtype=np.float64)
        return values

    return {
        f"volcano_{i}_difference": grid("difference"),
        f"volcano_{i}_p": grid("p_value"),
        f"volcano_{i}_significant": np.nan_to_num(grid("p_adjusted"), nan=1.0) < fdr,
        f"volcano_{i}_features": features.to_numpy(dtype=str),
    }


# ---------------------------------------------------------------------------------------------
# model/: the run's SubtypeModel (fitted preprocessing, joint NMF, subtype centres), as JSON plus `.npz`.
# ---------------------------------------------------------------------------------------------

def run_model(flow: Workflow, prepared: PreparedCohort, sweep: SweepResult, fitted: FinalFit) -> SubtypeModel:
    """The final fit of a run with every modality's fitted preprocessing, weight and file layout."""
    modalities = [
        ModelModality(m.name, m.kind, m.weight, m.orientation, prepared.preprocessors[m.name])
        for m in flow.modalities
    ]
    return SubtypeModel(sweep.models[fitted.count], modalities, fitted.names, fitted.centres, fitted.far_threshold,
                        len(prepared.patients))


def write_model(folder: Path, flow: Workflow, prepared: PreparedCohort, sweep: SweepResult, fitted: FinalFit) -> None:
    """Save the run's model into `folder` (what `strataweave assign` reads)."""
    run_model(flow, prepared, sweep, fitted).save(folder)
