"""Normal cohorts at the edges run end to end, and an analysis left out is said "not run: <reason>".

One modality, two modalities, no survival columns, a clinical table of patient IDs alone
(invented data, and scikit-learn's handwritten digits split into three views), and a planted
subtype of 5% of the patients that one modality measures only once. Each run is small (few
features, resamples and counts) so that the default test run stays fast.
"""

from __future__ import annotations

import html
import json
import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_digits
from sklearn.metrics import adjusted_rand_score

from strataweave.cli import main
from strataweave.data.synthetic import make_synthetic_cohort
from strataweave.report.contract import check_results
from workflow_files import LAYERS, SURVIVAL, write_synthetic_inputs, write_workflow

NO_SURVIVAL = "no survival columns in the workflow (cohort.time_column and cohort.event_column are not set)"
ONLY_IDS = "the clinical table has no column besides the ID column 'patient_id'"


def read_table(path: Path) -> pd.DataFrame:
    return pd.read_csv(path, sep="\t", comment="#", dtype={"patient_id": str})


def report_text(run: Path) -> str:
    """report.html as plain text: tags dropped, entities decoded, white space collapsed."""
    page = (run / "report.html").read_text(encoding="utf-8")
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", page)).split())


def run(flow: Path) -> Path:
    out = flow.parent / "run"
    assert main(["run", str(flow), "--out", str(out), "--quiet"]) == 0
    return out


def measured_patients(folder: Path, layers) -> set[str]:
    """Clinical patients measured on at least one of the layers (the analysis patients)."""
    clinical = set(read_table(folder / "clinical.tsv")["patient_id"])
    measured = set()
    for name in layers:
        table = pd.read_csv(folder / f"{name}.tsv", sep="\t", index_col=0)
        measured |= set(table.columns if LAYERS[name][1] == "features_in_rows" else table.index)
    return clinical & {str(p) for p in measured}


def check_full_run(out: Path, patients: set[str], tables: list[str], absent: list[str]) -> dict:
    """The run folder holds every output of the analyses that ran; results.json as read."""
    results = json.loads((out / "results.json").read_text())
    check_results(results)
    assignments = read_table(out / "assignments.tsv")
    assert set(assignments["patient_id"]) == patients and len(assignments) == len(patients)
    assert assignments["subtype"].notna().all()
    for name in ["report.html", "rank_selection.tsv", "model/model.json", *tables]:
        assert (out / name).is_file(), name
    for name in absent:
        assert not (out / name).exists(), name
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["status"] == "finished"
    return results


def figures(out: Path) -> set[str]:
    return {path.stem for path in (out / "figures").glob("*.png")}


@pytest.mark.slow
def test_a_single_modality_runs_and_says_graph_agreement_was_not_run(tmp_path):
    flow = write_synthetic_inputs(tmp_path / "in", ("rna",))
    out = run(flow)
    results = check_full_run(out, measured_patients(tmp_path / "in", ["rna"]),
                             ["survival.tsv", "clinical.tsv", "markers/rna.tsv"], ["enrichment.tsv"])
    assert results["not_run"]["graph_agreement"] == "not run: one modality, so no pair of modality graphs to compare"
    assert [block["modality"] for block in results["markers"]] == ["rna"]
    assert results["graph"]["agreement"] == []
    assert "graph_agreement" not in figures(out) and "survival_kaplan_meier" in figures(out)
    text = report_text(out)
    assert "Agreement between modality graphs: not run: one modality" in text
    assert "with one omics layer: rna" in text and "the graphs were fused" not in text


@pytest.mark.slow
def test_two_modalities_run_with_their_one_pair_of_graphs(tmp_path):
    flow = write_synthetic_inputs(tmp_path / "in", ("rna", "protein"))
    out = run(flow)
    results = check_full_run(out, measured_patients(tmp_path / "in", ["rna", "protein"]),
                             ["survival.tsv", "clinical.tsv", "markers/rna.tsv", "markers/protein.tsv"], [])
    pairs = [(row["modality_a"], row["modality_b"]) for row in results["graph"]["agreement"]]
    assert pairs == [("rna", "protein")]
    assert "graph_agreement" not in results["not_run"]
    assert {"graph_agreement", "markers_1", "markers_2", "survival_kaplan_meier"} <= figures(out)
    assert "with 2 omics layers" in report_text(out)


@pytest.mark.slow
def test_no_survival_columns_reports_survival_not_run(tmp_path):
    flow = write_synthetic_inputs(tmp_path / "in", tuple(LAYERS), ["age_years", "sex", "stage"], survival=False)
    out = run(flow)
    results = check_full_run(out, measured_patients(tmp_path / "in", LAYERS), ["clinical.tsv"], ["survival.tsv"])
    assert results["not_run"]["survival"] == f"not run: {NO_SURVIVAL}"
    assert "survival" not in results
    assert [row["variable"] for row in results["clinical"]] == ["age_years", "sex", "stage"]
    assert not {name for name in figures(out) if name.startswith("survival")}
    text = report_text(out)
    assert f"Outcomes Survival: not run: {NO_SURVIVAL}" in text
    assert "Kaplan-Meier" not in text


@pytest.fixture(scope="module")
def only_ids(tmp_path_factory) -> Path:
    """A run whose clinical table holds the patient IDs alone, rendered to HTML and PDF."""
    folder = tmp_path_factory.mktemp("only_ids")
    flow = write_synthetic_inputs(folder / "in", tuple(LAYERS), [], survival=False, formats='["html", "pdf"]')
    return run(flow)


@pytest.mark.slow
def test_a_clinical_table_of_ids_alone_runs_to_a_full_report(only_ids):
    patients = measured_patients(only_ids.parent, LAYERS)
    results = check_full_run(only_ids, patients, ["slides.pdf", *[f"markers/{m}.tsv" for m in LAYERS]],
                             ["clinical.tsv", "survival.tsv", "enrichment.tsv"])
    assert results["not_run"] == {
        "survival": f"not run: {NO_SURVIVAL}",
        "clinical": f"not run: {ONLY_IDS}",
        "enrichment": "not run: no gene-set file in the workflow (evaluation.gene_sets is not set)",
    }
    assert "clinical" not in results and "survival" not in results
    assert (only_ids / "slides.pdf").read_bytes().startswith(b"%PDF")
    text = report_text(only_ids)
    assert f"Clinical association: not run: {ONLY_IDS}" in text
    assert f"Survival: not run: {NO_SURVIVAL}" in text
    assert "strongest clinical association" not in text


@pytest.mark.slow
@pytest.mark.skipif(shutil.which("pdftotext") is None, reason="pdftotext (Debian poppler-utils) is not installed")
def test_slides_list_the_analyses_not_run(only_ids):
    text = subprocess.run(["pdftotext", str(only_ids / "slides.pdf"), "-"], capture_output=True, text=True,
                          check=True).stdout
    pages = [" ".join(page.split()) for page in text.split("\f") if page.strip()]
    listed = [page for page in pages if "Analyses not run" in page]
    assert len(listed) == 1
    assert f"Clinical association: not run: {ONLY_IDS}" in listed[0]
    assert f"Survival: not run: {NO_SURVIVAL}" in listed[0]
    assert not any(page.startswith("Clinical associations") for page in pages)
    assert "3 omics layers" in pages[0]


@pytest.mark.slow
def test_digits_in_three_views_with_a_clinical_table_of_ids_alone(tmp_path):
    """scikit-learn's handwritten digits 0, 1 and 4 (40 of each), the 8 x 8 pixels split into three views."""
    digits = load_digits()
    rng = np.random.default_rng(0)
    chosen = np.sort(np.concatenate([rng.choice(np.flatnonzero(digits.target == d), 40, replace=False)
                                     for d in (0, 1, 4)]))
    ids = pd.Index([f"D{i:04d}" for i in chosen], name="patient_id")
    pixels = pd.DataFrame(digits.data[chosen], index=ids, columns=[f"px{r}{c}" for r in range(8) for c in range(8)])
    pd.DataFrame(index=ids).to_csv(tmp_path / "clinical.tsv", sep="\t")
    views = {"top": range(0, 3), "middle": range(3, 5), "bottom": range(5, 8)}
    for name, rows in views.items():
        pixels[[f"px{r}{c}" for r in rows for c in range(8)]].to_csv(tmp_path / f"{name}.tsv", sep="\t")
    flow = write_workflow(tmp_path, {name: ("log_expression", "samples_in_rows") for name in views}, survival=False)
    out = run(flow)
    results = check_full_run(out, set(ids), [f"markers/{name}.tsv" for name in views], ["clinical.tsv", "survival.tsv"])
    assert results["not_run"]["clinical"] == f"not run: {ONLY_IDS}"
    assignments = read_table(out / "assignments.tsv").set_index("patient_id")
    digit = pd.Series(digits.target[chosen], index=ids)
    # adjusted Rand index from scikit-learn; the three views carry the digit, far from a random split
    assert adjusted_rand_score(digit.loc[assignments.index], assignments["subtype"]) > 0.3


@pytest.mark.slow
def test_a_planted_subtype_of_five_percent_measured_once_in_one_modality(tmp_path):
    """57 + 57 + 6 patients; mirna measures one of the 6, so only its markers are not run."""
    cohort = make_synthetic_cohort(n_patients=200, n_subtypes=3, seed=5)
    planted = cohort.planted
    keep = pd.Index(sorted(np.concatenate([planted[planted == s].index[:n] for s, n in (("S1", 57), ("S2", 57),
                                                                                         ("S3", 6))])))
    small = planted.loc[keep][lambda p: p == "S3"].index
    cohort.clinical.loc[keep].to_csv(tmp_path / "clinical.tsv", sep="\t", index_label="patient_id")
    for name, (_, orientation) in LAYERS.items():
        table = cohort.tables[name]
        if orientation == "features_in_rows":
            table = table[table.columns.intersection(keep, sort=False)]
        else:
            table = table.loc[table.index.intersection(keep, sort=False)]
            if name == "mirna":
                table = table.drop(index=table.index.intersection(small)[1:])
        table.to_csv(tmp_path / f"{name}.tsv", sep="\t")
    flow = write_workflow(tmp_path, LAYERS, survival=True, use_count=3)
    out = run(flow)
    results = check_full_run(out, measured_patients(tmp_path, LAYERS),
                             ["survival.tsv", "clinical.tsv", "markers/rna.tsv", "markers/protein.tsv"],
                             ["markers/mirna.tsv"])
    assignments = read_table(out / "assignments.tsv").set_index("patient_id")
    # adjusted Rand index from scikit-learn against the planted subtypes
    assert adjusted_rand_score(planted.loc[assignments.index], assignments["subtype"]) >= 0.9
    smallest = assignments["subtype"].value_counts().idxmin()
    assert sorted(results["subtypes"]["sizes"])[0] == 6
    assert results["not_run"]["markers/mirna"] == (
        f"not run: group '{smallest}' has 1 patient measured in mirna, expected at least 2 groups of 2 or more")
    assert [block["modality"] for block in results["markers"]] == ["rna", "protein"]
    assert results["survival"]["not_tested"] is None and len(results["survival"]["pairwise"]) == 3
    assert {"markers_1", "markers_2"} <= figures(out) and "markers_3" not in figures(out)
    assert f"Markers of mirna: not run: group '{smallest}' has 1 patient measured in mirna" in report_text(out)


def test_evaluate_without_omics_says_markers_and_survival_not_run(tmp_path):
    """`strataweave evaluate` of given groups, one of which has a single patient with a known outcome."""
    ids = [f"P{i:02d}" for i in range(30)]
    rng = np.random.default_rng(3)
    clinical = pd.DataFrame({"age": rng.integers(40, 80, 30), "os_months": rng.uniform(1, 60, 30).round(1),
                             "os_event": rng.integers(0, 2, 30)}, index=pd.Index(ids, name="patient_id"))
    groups = pd.Series(np.repeat(["A", "B", "C"], 10), index=clinical.index, name="group")
    clinical.loc[groups.index[groups == "C"][1:], "os_months"] = np.nan
    clinical.to_csv(tmp_path / "clinical.tsv", sep="\t")
    groups.to_csv(tmp_path / "groups.tsv", sep="\t")
    (tmp_path / "flow.toml").write_text(
        '[cohort]\nclinical = "clinical.tsv"\ntime_column = "os_months"\nevent_column = "os_event"\n'
        '[report]\nformats = ["html"]\n', encoding="utf-8")
    out = tmp_path / "evaluated"
    assert main(["evaluate", str(tmp_path / "flow.toml"), "--groups", str(tmp_path / "groups.tsv"),
                 "--out", str(out), "--quiet"]) == 0
    results = json.loads((out / "results.json").read_text())
    check_results(results)
    survival = ("not run: group 'C' has 1 patient with a known survival time and event, "
                "expected at least 2 groups of 2 or more")
    assert results["not_run"]["survival"] == survival
    assert results["not_run"]["markers"] == "not run: no omics layers in the workflow"
    assert "survival" not in results and not (out / "survival.tsv").exists()
    assert [row["variable"] for row in results["clinical"]] == ["age"]
    text = report_text(out)
    assert f"Survival: {survival}" in text and "Markers: not run: no omics layers in the workflow" in text
