"""The invented cohort: committed files regenerate byte for byte, have the promised shape, and carry
a planted structure that all layers together recover while no single layer does."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from lifelines.statistics import multivariate_logrank_test
from scipy.stats import hypergeom
from sklearn.cluster import KMeans
from sklearn.metrics import adjusted_rand_score
from threadpoolctl import threadpool_limits

from strataweave.errors import InputError
from strataweave.data.synthetic import (
    DEFAULT_PATIENTS,
    FEATURES_IN_ROWS,
    RECIPES,
    SAMPLES_IN_ROWS,
    make_synthetic_cohort,
    read_planted_subtypes,
    write_synthetic_cohort,
)

COMMITTED = Path(__file__).resolve().parents[2] / "synthetic_cohort"


@pytest.fixture(scope="module")
def cohort():
    return make_synthetic_cohort()


@pytest.fixture(scope="module")
def committed_tables():
    """Each committed layer file read back as written, first column as index."""
    return {r.name: pd.read_csv(COMMITTED / r.file_name, sep="\t", index_col=0) for r in RECIPES}


def test_committed_files_regenerate_byte_for_byte(tmp_path):
    written = write_synthetic_cohort(tmp_path)
    names = sorted(path.name for path in written)
    assert sorted(p.name for p in COMMITTED.iterdir()) == sorted([*names, "README.md"])
    for name in names:
        assert (tmp_path / name).read_bytes() == (COMMITTED / name).read_bytes(), name
    assert any(name.endswith(".gz") for name in names)
    assert sum((COMMITTED / name).stat().st_size for name in names) < 4_000_000


def test_same_seed_gives_the_same_cohort_and_another_seed_does_not():
    first, again, other = (make_synthetic_cohort(120, seed=s) for s in (7, 7, 8))
    for name, table in first.tables.items():
        pd.testing.assert_frame_equal(table, again.tables[name])
        assert not table.equals(other.tables[name])
    pd.testing.assert_frame_equal(first.clinical, again.clinical)
    pd.testing.assert_series_equal(first.planted, again.planted)
    assert not first.clinical.equals(other.clinical)


def test_file_orientation_and_sizes(committed_tables):
    clinical = pd.read_csv(COMMITTED / "clinical.tsv", sep="\t", index_col=0)
    assert clinical.shape == (DEFAULT_PATIENTS, 6)
    orientations = {r.orientation for r in RECIPES}
    assert orientations == {FEATURES_IN_ROWS, SAMPLES_IN_ROWS}
    for recipe in RECIPES:
        table = committed_tables[recipe.name]
        patients_axis = table.columns if recipe.orientation == FEATURES_IN_ROWS else table.index
        features_axis = table.index if recipe.orientation == FEATURES_IN_ROWS else table.columns
        assert patients_axis.isin(clinical.index).all(), recipe.name
        assert not features_axis.isin(clinical.index).any(), recipe.name
        assert features_axis.size == recipe.n_features and features_axis.is_unique and patients_axis.is_unique


def test_about_fifteen_percent_of_patients_miss_exactly_one_whole_layer(cohort):
    presence = cohort.presence()
    missing_per_patient = (~presence).sum(axis=1)
    assert missing_per_patient.max() == 1
    assert missing_per_patient.mean() == pytest.approx(0.15, abs=0.01)
    assert (presence.mean() > 0.9).all()


def test_value_ranges_by_kind(committed_tables):
    for recipe in RECIPES:
        table = committed_tables[recipe.name]
        values = table.to_numpy(dtype=float)
        if recipe.kind == "counts":
            assert pd.api.types.is_integer_dtype(table.dtypes.iloc[0]) and (values >= 0).all(), recipe.name
            assert (table.dtypes == table.dtypes.iloc[0]).all()
        elif recipe.kind == "beta":
            assert ((values > 0) & (values < 1)).all()
        else:
            missing = np.isnan(values)
            assert 0.005 < missing.mean() < 0.10
            assert (values[~missing] > 0).all()
            assert not missing.all(axis=0).any() and not missing.all(axis=1).any()


def test_clinical_columns_and_values():
    clinical = pd.read_csv(COMMITTED / "clinical.tsv", sep="\t", dtype={"patient_id": str})
    assert list(clinical.columns) == [
        "patient_id", "age_years", "sex", "stage", "treatment_centre", "os_months", "os_event",
    ]
    assert clinical["patient_id"].is_unique
    assert set(clinical["sex"]) == {"female", "male"}
    assert set(clinical["stage"]) == {"I", "II", "III", "IV"}
    assert set(clinical["os_event"]) == {0, 1}
    assert (clinical["os_months"] > 0).all() and clinical["age_years"].between(18, 100).all()


def test_planted_file_is_marked_synthetic_and_reads_back(cohort):
    first_line = (COMMITTED / "planted_subtypes.tsv").read_text().splitlines()[0]
    assert first_line.startswith("# ") and "synthetic" in first_line
    planted = read_planted_subtypes(COMMITTED / "planted_subtypes.tsv")
    pd.testing.assert_series_equal(planted, cohort.planted)
    shares = planted.value_counts(normalize=True).sort_index()
    assert shares.to_numpy() == pytest.approx([0.35, 0.28, 0.22, 0.15], abs=0.01)


def test_reader_and_generator_reject_bad_input(tmp_path):
    bad = tmp_path / "planted.tsv"
    bad.write_text("id\tgroup\nCLB-0001\tS1\n")
    with pytest.raises(InputError, match="planted.tsv, header"):
        read_planted_subtypes(bad)
    bad.write_bytes(b"patient_id\tplanted_subtype\nCLB-0001\tS1\nCLB-0001\tS2\n")
    with pytest.raises(InputError, match="planted.tsv, column patient_id: found 'CLB-0001' twice"):
        read_planted_subtypes(bad)
    bad.write_bytes(b"\xff\xfe\x00\x81 not text")
    with pytest.raises(InputError, match="planted.tsv"):
        read_planted_subtypes(bad)
    with pytest.raises(InputError, match="missing.tsv"):
        read_planted_subtypes(tmp_path / "missing.tsv")
    with pytest.raises(InputError, match="n_patients"):
        make_synthetic_cohort(n_patients=20)
    with pytest.raises(InputError, match="n_subtypes"):
        make_synthetic_cohort(n_subtypes=1)


def _standardised_view(cohort, name):
    """log2 CPM (counts), M-values (beta), log2 (abundance) with median fill, then z-scores
    scaled by 1/sqrt(features) so that each layer weighs the same (common practice)."""
    raw = cohort.patients_by_features(name)
    kind = cohort.kinds[name]
    if kind == "counts":
        view = np.log2(raw.div(raw.sum(axis=1), axis=0) * 1e6 + 1.0)
    elif kind == "beta":
        view = np.log2(raw / (1.0 - raw))
    else:
        view = np.log2(raw)
        view = view.fillna(view.median())
    return (view - view.mean()) / view.std() / np.sqrt(view.shape[1])


def _kmeans_ari(view, truth):
    with threadpool_limits(1):  # one thread: much faster than contended threads on a shared machine
        labels = KMeans(n_clusters=4, n_init=10, random_state=0).fit_predict(view.to_numpy())
    return adjusted_rand_score(truth, labels)  # reference implementation: scikit-learn


@pytest.mark.parametrize("n_patients, seed", [(DEFAULT_PATIENTS, None), (160, 11)])
def test_all_layers_together_recover_the_subtypes_and_no_single_layer_does(n_patients, seed):
    cohort = make_synthetic_cohort(n_patients) if seed is None else make_synthetic_cohort(n_patients, seed=seed)
    views = {name: _standardised_view(cohort, name) for name in cohort.tables}
    complete = cohort.presence().all(axis=1)
    patients = complete.index[complete]
    truth = cohort.planted.loc[patients]
    joint = _kmeans_ari(pd.concat([v.loc[patients] for v in views.values()], axis=1), truth)
    single = {name: _kmeans_ari(view.loc[patients], truth) for name, view in views.items()}
    assert joint > 0.8, (joint, single)
    assert max(single.values()) < min(0.85, joint - 0.15), (joint, single)


def test_each_layer_leaves_some_pair_of_subtypes_indistinguishable(cohort):
    """In every layer some pair of subtypes has (near) the same mean profile, while other pairs do not."""
    for name in cohort.tables:
        view = _standardised_view(cohort, name)
        means = view.groupby(cohort.planted.loc[view.index]).mean()
        distances = [np.linalg.norm(means.loc[a] - means.loc[b]) for a in means.index for b in means.index if a < b]
        assert min(distances) < 0.5 * max(distances), (name, distances)


def test_survival_differs_by_subtype_with_censoring(cohort):
    clinical = cohort.clinical
    assert 0.3 < clinical["os_event"].mean() < 0.8
    # reference implementation: lifelines' multivariate log-rank test
    result = multivariate_logrank_test(clinical["os_months"], cohort.planted, clinical["os_event"])
    assert result.p_value < 1e-6


def test_gene_sets_enriched_in_planted_markers_and_the_rest_not(cohort):
    genes = cohort.tables["rna"].index
    lines = (COMMITTED / "gene_sets.tsv").read_text().splitlines()
    assert len(lines) == len(cohort.gene_sets) >= 20
    for line in lines:
        name, description, *members = line.split("\t")
        assert description and members and set(members) <= set(genes), name
    rna_markers = cohort.markers[(cohort.markers["layer"] == "rna") & (cohort.markers["direction"] > 0)]
    p_values = {}
    for name, (_, members) in cohort.gene_sets.items():
        marked = cohort.enriched_sets.get(name)
        pool = rna_markers[rna_markers["subtypes"] == ",".join(marked)] if marked else rna_markers
        hits = int(np.isin(members, pool["feature_id"]).sum())
        # over-representation p-value from scipy's hypergeometric distribution
        p_values[name] = hypergeom.sf(hits - 1, genes.size, len(pool), len(members))
    enriched = [p_values[name] for name in cohort.enriched_sets]
    random_sets = [p for name, p in p_values.items() if name not in cohort.enriched_sets]
    assert 1 <= len(enriched) < len(random_sets)
    assert max(enriched) < 1e-8
    assert np.mean(np.array(random_sets) < 0.01) < 0.2


def _splits(group: str, a: str, b: str) -> bool:
    """True when a marker group (comma-joined subtypes) holds exactly one of subtypes a and b."""
    members = group.split(",")
    return (a in members) != (b in members)


@pytest.mark.parametrize("n_subtypes", [2, 3, 4, 5])
def test_every_pair_of_subtypes_is_told_apart_by_several_layers(n_subtypes):
    cohort = make_synthetic_cohort(30 * n_subtypes, n_subtypes, seed=3)
    groups = cohort.markers.groupby("layer")["subtypes"].unique()  # the marker groups each layer sees
    names = sorted(cohort.planted.unique())
    assert len(names) == n_subtypes and cohort.planted.value_counts().is_unique  # unequal sizes
    for a in names:
        for b in names:
            if a < b:
                layers = [layer for layer, seen in groups.items() if any(_splits(g, a, b) for g in seen)]
                assert len(layers) >= 2, (a, b, layers)
    if n_subtypes >= 4:
        assert all(len(seen) < n_subtypes for seen in groups)
