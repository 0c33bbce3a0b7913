"""AnnData / MuData: an .h5mu or .h5ad files read as the same cohort as the tables, subtypes written
back into obs, and the command line run on an .h5mu."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

anndata = pytest.importorskip("anndata")
mudata = pytest.importorskip("mudata")

import strataweave as sw  # noqa: E402
from strataweave.caution import CAUTION  # noqa: E402
from strataweave.cli import main  # noqa: E402
from strataweave.data.annotated import CAUTION_KEY  # noqa: E402
from strataweave.data.synthetic import write_synthetic_cohort  # noqa: E402
from strataweave.files import write_table  # noqa: E402

FILES = {"rna": ("rna_counts.tsv.gz", "counts"), "protein": ("protein_abundance.tsv", "abundance")}


@pytest.fixture(scope="module")
def tables(tmp_path_factory):
    """An invented cohort as tables, and the same cohort as one .h5mu and as .h5ad files."""
    folder = tmp_path_factory.mktemp("annotated")
    write_synthetic_cohort(folder, n_patients=80)
    clinical = sw.read_clinical(folder / "clinical.tsv", "patient_id")
    raw = {name: sw.read_matrix(folder / file, known_ids=clinical.index) for name, (file, _) in FILES.items()}
    layers = {name: anndata.AnnData(X=frame.to_numpy(), obs=pd.DataFrame(index=frame.index.astype(str)),
                                    var=pd.DataFrame(index=frame.columns.astype(str)))
              for name, frame in raw.items()}
    for name, layer in layers.items():
        layer.write_h5ad(folder / f"{name}.h5ad")
    both = mudata.MuData(layers)
    clinical = clinical.loc[list(both.obs_names)]  # the file's patient order is the cohort's: keep one order
    write_table(clinical.reset_index(), folder / "clinical.tsv")
    both.obs = clinical.copy()
    both.write(folder / "cohort.h5mu")
    return folder, clinical


def test_an_h5mu_and_h5ad_files_read_as_the_cohort_of_the_tables(tables):
    folder, clinical = tables
    from_tables = sw.read_cohort(folder / "clinical.tsv", {n: (folder / f, k) for n, (f, k) in FILES.items()})
    from_h5mu = sw.read_mudata(folder / "cohort.h5mu", {n: k for n, (_, k) in FILES.items()})
    from_h5ad = sw.read_cohort(folder / "clinical.tsv", {n: (folder / f"{n}.h5ad", k) for n, (_, k) in FILES.items()})
    for cohort in (from_h5mu, from_h5ad):
        assert list(cohort.patients) == list(from_tables.patients)
        for mine, theirs in zip(cohort.aligned_views(), from_tables.aligned_views()):
            pd.testing.assert_frame_equal(mine, theirs, check_names=False)
    obs = from_h5mu.clinical
    assert set(clinical.columns) <= set(obs.columns)
    pd.testing.assert_series_equal(obs.loc[clinical.index, "os_months"], clinical["os_months"], check_names=False)


def test_subtypes_round_trip_into_obs_without_changing_the_input(tables, tmp_path):
    folder, clinical = tables
    source = folder / "cohort.h5mu"
    before = source.read_bytes()
    patients = clinical.index[:50]
    table = pd.DataFrame({"subtype": np.where(np.arange(50) % 2, "S1", "S2"), "confidence": np.linspace(0, 1, 50),
                          "score_S1": np.linspace(1, 0, 50)}, index=patients)
    out = sw.write_annotated(source, tmp_path / "with_subtypes.h5mu", table)
    assert source.read_bytes() == before
    obs = mudata.read_h5mu(out).obs
    assert list(obs.loc[patients, "subtype"].astype(str)) == list(table["subtype"])
    np.testing.assert_allclose(obs.loc[patients, "subtype_confidence"], table["confidence"])
    np.testing.assert_allclose(obs.loc[patients, "subtype_score_S1"], table["score_S1"])
    assert obs.drop(index=patients)["subtype"].isna().all()
    assert mudata.read_h5mu(out).uns[CAUTION_KEY] == CAUTION
    with pytest.raises(sw.InputError, match="is the input file"):
        sw.write_annotated(source, source, table)


def test_a_modality_missing_from_the_h5mu_is_bad_input_naming_it(tables):
    folder, _ = tables
    with pytest.raises(sw.InputError, match="'methylation'.*expected one of rna, protein"):
        sw.read_mudata(folder / "cohort.h5mu", {"methylation": "beta"})


def _workflow(folder, clinical: str, paths: dict[str, str]) -> str:
    modalities = "".join(f'\n[[modality]]\nname = "{n}"\npath = "{paths[n]}"\nkind = "{k}"\nimpute = "median"\n'
                         for n, (_, k) in FILES.items())
    return (f'seed = 5\n[cohort]\nclinical = "{clinical}"\ntime_column = "os_months"\nevent_column = "os_event"\n'
            f'{modalities}\n[subtypes]\ncounts = [2, 3]\n[resampling]\nn_resamples = 2\n'
            f'[evaluation]\nn_permutations = 0\n[report]\nformats = []\n')


def test_the_command_line_runs_on_an_h5mu_as_on_the_tables(tables, tmp_path):
    folder, _ = tables
    h5mu = str(folder / "cohort.h5mu")
    (tmp_path / "h5mu.toml").write_text(_workflow(folder, h5mu, {n: h5mu for n in FILES}))
    (tmp_path / "tables.toml").write_text(_workflow(folder, str(folder / "clinical.tsv"),
                                                    {n: str(folder / f) for n, (f, _) in FILES.items()}))
    for name in ("h5mu", "tables"):
        assert main(["--quiet", "run", str(tmp_path / f"{name}.toml"), "--out", str(tmp_path / name)]) == 0
    read = [pd.read_csv(tmp_path / name / "assignments.tsv", sep="\t", comment="#") for name in ("h5mu", "tables")]
    pd.testing.assert_frame_equal(*read)
