"""End to end on a small invented cohort: run, resume after a kill, assign, evaluate, compare, report.

One run of a smaller configuration is shared by the tests of this module (module fixture).
"""

from __future__ import annotations

import hashlib
import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import adjusted_rand_score

from strataweave.caution import CAUTION
from strataweave.cli import main
from strataweave.data.synthetic import read_planted_subtypes, write_synthetic_cohort
from strataweave.report.contract import check_results

pytestmark = pytest.mark.slow

PATIENTS = 200
PLANTED = 4
FILES = {
    "rna": ("rna_counts.tsv.gz", "counts"),
    "methylation": ("methylation_beta.tsv.gz", "beta"),
    "mirna": ("mirna_counts.tsv", "counts"),
    "protein": ("protein_abundance.tsv", "abundance"),
}
TABLES = ["assignments.tsv", "rank_selection.tsv", "survival.tsv", "clinical.tsv", "enrichment.tsv", "results.json"]


def small_workflow(cohort: Path, formats: str = "[]", n_permutations: int = 200) -> str:
    modalities = "".join(
        f'\n[[modality]]\nname = "{name}"\npath = "{cohort / file}"\nkind = "{kind}"\ntop_features = 300\n'
        for name, (file, kind) in FILES.items()
    )
    return f"""
seed = 11
[cohort]
clinical = "{cohort / 'clinical.tsv'}"
time_column = "os_months"
event_column = "os_event"
{modalities}
[factorization]
graph_weight = 0.3
n_restarts = 1
max_iter = 150

[subtypes]
counts = [3, 4, 5]

[resampling]
n_resamples = 8

[evaluation]
covariates = ["age_years"]
n_permutations = {n_permutations}
gene_sets = "{cohort / 'gene_sets.tsv'}"

[report]
formats = {formats}
"""


def read_table(path: Path) -> pd.DataFrame:
    return pd.read_csv(path, sep="\t", comment="#")


@pytest.fixture(scope="module")
def cohort(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("cohort")
    write_synthetic_cohort(folder, n_patients=PATIENTS)
    return folder


@pytest.fixture(scope="module")
def finished(cohort, tmp_path_factory) -> Path:
    """An uninterrupted run of the small workflow."""
    root = tmp_path_factory.mktemp("runs")
    (root / "flow.toml").write_text(small_workflow(cohort))
    assert main(["run", str(root / "flow.toml"), "--out", str(root / "run"), "--quiet"]) == 0
    return root / "run"


def test_planted_count_is_recommended_and_recovered(finished, cohort) -> None:
    results = json.loads((finished / "results.json").read_text())
    assert results["selection"]["recommended"] == PLANTED
    assert results["subtype_count"] == PLANTED
    assignments = read_table(finished / "assignments.tsv").set_index("patient_id")
    planted = read_planted_subtypes(cohort / "planted_subtypes.tsv")
    # adjusted Rand index from scikit-learn, the reference implementation
    assert adjusted_rand_score(planted.loc[assignments.index], assignments["subtype"]) >= 0.85


def test_run_folder_follows_the_contract(finished, cohort) -> None:
    results = json.loads((finished / "results.json").read_text())
    check_results(results)
    assert results["caution"] == CAUTION
    logrank = results["survival"]["logrank"]
    assert {"statistic", "df", "p_value", "p_value_permutation"} <= set(logrank)
    assert logrank["df"] == PLANTED - 1
    assert {"term", "hazard_ratio", "ci_lower", "ci_upper", "p_value"} <= set(results["survival"]["cox"][0])
    assignments = read_table(finished / "assignments.tsv")
    assert list(assignments.columns) == ["patient_id", "subtype", "confidence", "core",
                                         *[f"score_S{i}" for i in range(1, PLANTED + 1)]]
    assert assignments["core"].sum() == results["subtypes"]["core_patients"]
    summary = read_table(finished / "clinical_summary.tsv")
    assert list(summary.columns) == ["variable", "level", *results["clinical_summary"]["groups"], "test", "p_adjusted"]
    rank_test = read_table(finished / "enrichment_rank_test.tsv")
    assert {"subtype", "gene_set", "auc", "p_adjusted"} <= set(rank_test.columns)
    assert len(read_table(finished / "rank_selection.tsv")) == 3
    assert sorted(p.name for p in (finished / "markers").iterdir()) == sorted(f"{name}.tsv" for name in FILES)
    assert (finished / "model" / "model.json").is_file() and (finished / "stages" / "figure_data.npz").is_file()
    assert (finished / "assignments.tsv").read_text().startswith("# " + CAUTION)

    manifest = json.loads((finished / "manifest.json").read_text())
    assert manifest["status"] == "finished" and manifest["seed"] == 11
    # sha256 from hashlib, computed here independently of the program
    clinical = str((cohort / "clinical.tsv").resolve())
    assert manifest["inputs"][clinical] == hashlib.sha256((cohort / "clinical.tsv").read_bytes()).hexdigest()
    assert set(manifest["stages"]) == {"load", "prepare", "graphs", "sweep", "select", "final_fit", "evaluate", "report"}
    assert "numpy" in manifest["packages"] and "[cohort]" in manifest["workflow"]["text"]


def _signal_during_sweep(command: list[str], signal_number: int) -> tuple[int, str]:
    """Start the run, send the signal once the sweep has started; exit code and the rest of stderr."""
    process = subprocess.Popen(command, stderr=subprocess.PIPE, text=True, start_new_session=True)
    for line in process.stderr:
        if line.startswith("sweep: running"):
            os.killpg(process.pid, signal_number)
            break
    rest = process.stderr.read()
    process.wait(timeout=60)
    return process.returncode, rest


def test_resume_after_kill_gives_byte_identical_tables(finished, tmp_path) -> None:
    flow = finished.parent / "flow.toml"
    out = tmp_path / "resumed"
    command = [sys.executable, "-m", "strataweave.cli", "run", str(flow), "--out", str(out), "--verbose"]
    returncode, _ = _signal_during_sweep(command, signal.SIGKILL)
    assert returncode == -signal.SIGKILL, "the run ended before the sweep could be interrupted"
    staging = tmp_path / ".resumed.running"
    assert not out.exists()
    manifest = json.loads((staging / "manifest.json").read_text())
    assert manifest["status"] == "running" and "sweep" not in manifest["stages"]
    assert not list((staging / "stages").glob("sweep-*.json"))

    assert main(["run", str(flow), "--out", str(out), "--verbose"]) == 0
    stages = json.loads((out / "manifest.json").read_text())["stages"]
    assert stages["prepare"]["cached"] and not stages["sweep"]["cached"]
    for name in TABLES + [f"markers/{m}.tsv" for m in FILES]:
        assert (out / name).read_bytes() == (finished / name).read_bytes(), name


@pytest.mark.xfail(strict=False, reason="known defect, open: on a loaded 2-core CI machine a SIGINT sent to the "
                   "process group as the sweep's worker processes start is sometimes lost and the run finishes "
                   "with exit 0; sent once tasks run, a worker's interrupt can end the run with exit 2")
def test_ctrl_c_during_the_sweep_exits_130_with_one_line(finished, tmp_path) -> None:
    command = [sys.executable, "-m", "strataweave.cli", "run", str(finished.parent / "flow.toml"),
               "--out", str(tmp_path / "interrupted"), "--verbose"]
    returncode, rest = _signal_during_sweep(command, signal.SIGINT)
    assert returncode == 130
    assert rest.strip().splitlines()[-1] == "strataweave run: interrupted; run the same command again to resume"
    assert json.loads((tmp_path / ".interrupted.running" / "manifest.json").read_text())["status"] == "running"


def test_finished_run_is_not_overwritten_and_one_change_reruns_only_its_stages(finished, cohort, tmp_path, capsys) -> None:
    flow = finished.parent / "flow.toml"
    before = (finished / "assignments.tsv").read_bytes()
    assert main(["run", str(flow), "--out", str(finished), "--quiet"]) == 2
    assert "--overwrite" in capsys.readouterr().err
    assert (finished / "assignments.tsv").read_bytes() == before

    changed = tmp_path / "changed.toml"
    changed.write_text(small_workflow(cohort, n_permutations=300))
    copy = tmp_path / "copy"
    subprocess.run(["cp", "-r", str(finished), str(copy)], check=True)
    assert main(["run", str(changed), "--out", str(copy), "--quiet", "--overwrite"]) == 0
    stages = json.loads((copy / "manifest.json").read_text())["stages"]
    assert [name for name, stage in stages.items() if not stage["cached"]] == ["evaluate", "report"]
    assert (copy / "assignments.tsv").read_bytes() == before


def test_assign_puts_training_patients_back_into_their_subtypes(finished, cohort, tmp_path) -> None:
    own = read_table(finished / "assignments.tsv").set_index("patient_id")["subtype"]
    every = [f"--modality={name}={cohort / file}" for name, (file, _) in FILES.items()]
    assert main(["assign", str(finished), *every, "--out", str(tmp_path / "all.tsv"), "--quiet"]) == 0
    assigned = read_table(tmp_path / "all.tsv").set_index("patient_id")
    assert (assigned.loc[own.index, "subtype"] == own).mean() >= 0.95
    assert assigned["far_from_subtypes"].mean() <= 0.05

    without_rna = [arg for arg in every if not arg.startswith("--modality=rna=")]
    assert main(["assign", str(finished), *without_rna, "--out", str(tmp_path / "less.tsv"), "--quiet"]) == 0
    fewer = read_table(tmp_path / "less.tsv").set_index("patient_id")
    assert (fewer.loc[own.index, "subtype"] == own).mean() >= 0.85
    assert not any("rna" in used.split(",") for used in fewer["modalities_used"])
    # equally weighted modalities: the score margin counts by the share of modalities used
    scores = fewer[[f"score_S{i}" for i in range(1, PLANTED + 1)]].to_numpy()
    top_two = -np.sort(-scores, axis=1)[:, :2]
    share = (fewer["modalities_used"].str.count(",") + 1).to_numpy() / len(FILES)
    assert share.max() == 0.75
    assert np.allclose(fewer["confidence"], share * (top_two[:, 0] - top_two[:, 1]), atol=1e-5)  # 6 digits in the file
    assert fewer["confidence"].mean() < assigned["confidence"].mean()


def test_assign_refuses_an_unknown_modality(finished, cohort, capsys) -> None:
    assert main(["assign", str(finished), f"--modality=rnaseq={cohort / 'mirna_counts.tsv'}"]) == 2
    assert "rnaseq" in capsys.readouterr().err


def test_evaluate_a_given_grouping_without_modalities_and_compare(finished, cohort, tmp_path) -> None:
    flow = tmp_path / "outcome.toml"
    flow.write_text(
        f'[cohort]\nclinical = "{cohort / "clinical.tsv"}"\ntime_column = "os_months"\nevent_column = "os_event"\n'
        "[evaluation]\nn_permutations = 100\n[report]\nformats = []\n"
    )
    groups = cohort / "planted_subtypes.tsv"
    assert main(["evaluate", str(flow), "--groups", str(groups), "--out", str(tmp_path / "planted"), "--quiet"]) == 0
    results = json.loads((tmp_path / "planted" / "results.json").read_text())
    assert results["subtypes"]["labels"] == ["S1", "S2", "S3", "S4"]
    assert results["survival"]["logrank"]["df"] == 3
    assert "markers" not in results and (tmp_path / "planted" / "clinical.tsv").is_file()

    assert main(["compare", str(finished), str(tmp_path / "planted"), "--out", str(tmp_path / "cmp")]) == 0
    comparison = json.loads((tmp_path / "cmp" / "comparison.json").read_text())
    ours = read_table(finished / "assignments.tsv").set_index("patient_id")["subtype"]
    planted = read_planted_subtypes(groups).loc[ours.index]
    # scikit-learn's ARI as the reference for the comparison
    assert comparison["ari"] == pytest.approx(adjusted_rand_score(planted, ours), abs=1e-12)
    page = (tmp_path / "cmp" / "comparison.html").read_text(encoding="utf-8")
    assert CAUTION in page and {"comparison.png", "comparison.svg"} <= {p.name for p in (tmp_path / "cmp").iterdir()}
    text = page.split('src="data:')[0] + page.split('src="data:')[1].split('"', 1)[1]  # the page without its figure
    assert not any(patient in text for patient in ours.index)


def test_report_renders_again_from_the_run_folder(finished, tmp_path) -> None:
    copy = tmp_path / "copy"
    subprocess.run(["cp", "-r", str(finished), str(copy)], check=True)
    results = json.loads((copy / "results.json").read_text())
    results["report"]["formats"] = ["html"]
    (copy / "results.json").write_text(json.dumps(results))
    assert main(["report", str(copy), "--quiet"]) == 0
    html = (copy / "report.html").read_text()
    assert CAUTION.split(":")[0] in html and "CLB-" not in html
    assert np.load(copy / "stages" / "figure_data.npz", allow_pickle=False)["subtype_code"].size == PATIENTS
