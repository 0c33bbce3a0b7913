"""The arrays of the per-modality views: maps, separation, factor shares and loadings, volcano tables."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from strataweave.factorize import JointNMF
from strataweave.workflow.stages import ReportedGrouping
from strataweave.workflow.outputs import factor_arrays, modality_map_arrays, volcano_arrays

NAMES = ["S1", "S2", "S3"]


def _grouping(patients: pd.Index, codes: np.ndarray) -> ReportedGrouping:
    n = len(patients)
    return ReportedGrouping(patients, NAMES, codes, np.ones(n), np.ones(n, dtype=bool), None)


@pytest.fixture
def layers() -> tuple[dict[str, pd.DataFrame], ReportedGrouping]:
    """Invented layers of 60 patients: 'apart' moves S1 far from the rest, 'noise' keeps everyone mixed,
    'sparse' measures only 2 patients."""
    rng = np.random.default_rng(5)
    patients = pd.Index([f"P{i:02d}" for i in range(60)])
    codes = np.repeat([0, 1, 2], 20)
    apart = rng.normal(size=(60, 6)) + 8.0 * (codes == 0)[:, None]
    sparse = np.full((60, 4), np.nan)
    sparse[:2] = rng.normal(size=(2, 4))
    views = {"apart": pd.DataFrame(apart, index=patients), "noise": pd.DataFrame(rng.normal(size=(60, 6)), index=patients),
             "sparse": pd.DataFrame(sparse, index=patients)}
    return views, _grouping(patients, codes)


def test_map_is_the_first_two_principal_components(layers) -> None:
    views, grouping = layers
    arrays = modality_map_arrays(list(views), views, grouping)
    values = views["apart"].to_numpy()
    # numpy's SVD of the centred profile as the reference (components equal up to sign)
    u, s, _ = np.linalg.svd(values - values.mean(axis=0), full_matrices=False)
    assert np.allclose(np.abs(arrays["modality_0_map"]), np.abs(u[:, :2] * s[:2]), atol=1e-8)
    assert np.allclose(arrays["modality_0_map_variance"], (s ** 2 / np.sum(s ** 2))[:2])
    assert np.array_equal(arrays["modality_0_map_codes"], grouping.codes)


def test_a_modality_under_three_patients_has_no_map_and_no_separation(layers) -> None:
    views, grouping = layers
    arrays = modality_map_arrays(list(views), views, grouping)
    assert "modality_2_map" not in arrays and "modality_1_map" in arrays
    assert np.isnan(arrays["modality_separation"][2]).all()


def test_separation_is_high_only_where_the_layer_keeps_the_subtype_apart(layers) -> None:
    views, grouping = layers
    separation = modality_map_arrays(list(views), views, grouping)["modality_separation"]
    assert separation[0, 0] > 0.7  # S1 lies far from the rest in 'apart'
    assert separation[0, 1:].max() < separation[0, 0] - 0.4  # S2 and S3 are mixed with each other there
    assert np.abs(separation[1]).max() < 0.15  # 'noise' keeps no subtype apart


def test_factor_shares_are_each_modality_s_weighted_loading(layers) -> None:
    views, grouping = layers
    rng = np.random.default_rng(2)
    factor_views = {"rna": pd.DataFrame(rng.uniform(size=(60, 5)), columns=[f"g{j}" for j in range(5)]),
                    "methylation": pd.DataFrame(rng.uniform(size=(60, 4)),
                                                columns=[f"c{j}:{part}" for part in ("pos", "neg") for j in range(2)])}
    model = JointNMF(n_components=3, random_state=0, max_iter=50).fit(list(factor_views.values()))
    model.view_names_ = list(factor_views)
    arrays = factor_arrays(["rna", "methylation"], model, factor_views, grouping)
    squared = [w * h ** 2 for w, h in zip(model.modality_weights_, model.components_)]
    expected = np.stack([q.sum(axis=1) for q in squared])
    assert np.allclose(arrays["factor_contribution"], expected / expected.sum(axis=0))
    assert np.allclose(arrays["factor_contribution"].sum(axis=0), 1.0)
    every = np.concatenate(squared, axis=1)
    assert np.allclose(arrays["factor_top_share"][:, 0], every.max(axis=1) / every.sum(axis=1))
    assert (np.diff(arrays["factor_top_share"], axis=1) <= 0).all()
    names = set(arrays["factor_top_feature"].ravel())
    assert names <= {*(f"g{j}" for j in range(5)), "c0 +", "c1 +", "c0 -", "c1 -"}
    means = pd.DataFrame(model.patient_factor_).groupby(grouping.codes).mean().to_numpy()  # pandas as the reference
    assert np.allclose(arrays["factor_subtype_mean"], means)


def test_volcano_arrays_are_the_marker_table_pivoted(layers) -> None:
    _, grouping = layers
    rng = np.random.default_rng(8)
    table = pd.DataFrame({"group": np.repeat(NAMES, 4), "feature": np.tile(["a", "b", "c", "d"], 3),
                          "difference": rng.normal(size=12), "p_value": rng.uniform(size=12)})
    table["p_adjusted"] = np.minimum(table["p_value"] * 2, 1.0)
    arrays = volcano_arrays(0, table, 0.5, grouping)
    # pandas' pivot as the reference layout: subtypes (rows) x features (columns)
    pivot = table.pivot(index="group", columns="feature")
    assert np.allclose(arrays["volcano_0_difference"], pivot["difference"].loc[NAMES, ["a", "b", "c", "d"]])
    assert np.allclose(arrays["volcano_0_p"], pivot["p_value"].loc[NAMES, ["a", "b", "c", "d"]])
    assert np.array_equal(arrays["volcano_0_significant"], (pivot["p_adjusted"] < 0.5).loc[NAMES].to_numpy())
    assert list(arrays["volcano_0_features"]) == ["a", "b", "c", "d"]


def test_an_empty_cell_inside_a_measured_profile_takes_the_feature_mean(layers) -> None:
    views, grouping = layers
    holed = views["apart"].copy()
    holed.iloc[3, 2] = np.nan
    filled = views["apart"].copy()
    filled.iloc[3, 2] = holed.iloc[:, 2].mean()  # pandas' mean skips the empty cell
    maps = [modality_map_arrays(["apart"], {"apart": view}, grouping)["modality_0_map"] for view in (holed, filled)]
    assert np.allclose(maps[0], maps[1])
