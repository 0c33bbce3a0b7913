"""Arrays of the per-modality views in stages/figure_data.npz (names as `strataweave.report.contract.ARRAYS`).

Each omics layer on its own: a 2-D map of its patients and how well it keeps each subtype apart
(which layer separates which subtypes); the share of each factor every modality holds and each
factor's top loadings (what the joint model took from where); every feature's marker test for the
volcano plots. A modality is its position in cohort.modalities, a marker block its position in markers.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.decomposition import PCA
from sklearn.metrics import silhouette_samples

from strataweave.data.scaling import NEGATIVE_SUFFIX, POSITIVE_SUFFIX
from strataweave.workflow.grouping import ReportedGrouping
from strataweave.workflow.sweeping import model_from_record

MIN_PATIENTS = 3  # a map of fewer patients shows nothing
MAX_SEPARATION_PATIENTS = 2000  # silhouettes cost patients squared: larger layers are evenly thinned
SEPARATION_COMPONENTS = 10  # silhouettes are measured on this many principal components
TOP_LOADINGS = 8


def _measured(view: pd.DataFrame, grouping: ReportedGrouping) -> tuple[np.ndarray, np.ndarray]:
    """Values (missing cells at the feature mean) and subtype codes of the grouped patients measured here."""
    codes = pd.Series(grouping.codes, index=grouping.patients)
    rows = view[view.notna().any(axis=1) & view.index.isin(grouping.patients)]
    values = rows.fillna(rows.mean()).fillna(0.0).to_numpy(dtype=np.float64)
    return values, codes.loc[rows.index].to_numpy(dtype=np.int64)


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


def factor_arrays(names: list[str], model_record: dict, factor_views: dict[str, pd.DataFrame],
                  grouping: ReportedGrouping) -> dict[str, np.ndarray]:
    """Share of each factor's loading held by each modality (M x r, columns sum to 1), the top loadings of each
    factor across modalities, and the mean patient factor of each subtype (K x r)."""
    model = model_from_record(model_record)
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
    patient_factor = np.asarray(model_record["patient_factor"], dtype=np.float64)
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
