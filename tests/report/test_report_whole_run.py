"""A whole `strataweave run` on an invented cohort whose names carry <script>, quotes and ampersands:
the HTML report escapes every one of them and shows no patient identifier."""

from __future__ import annotations

import html
import json
import re
from pathlib import Path

import pytest

from strataweave.cli import main
from strataweave.data.synthetic import make_synthetic_cohort

TITLE = '<script>alert("run")</script> Ana & Bo\'s "cohort"'
STAGE = 'stage<script>x</script>&"'
FEATURE_SUFFIX = '<b>&"\''
SET_PREFIX = '<script>set</script> & "q" '
PATIENT_SUFFIX = "<i>&amp;"

WORKFLOW = """\
[cohort]
clinical = "clinical.tsv"
id_column = "patient_id"
time_column = "os_months"
event_column = "os_event"

[[modality]]
name = "rna"
path = "rna.tsv"
kind = "counts"
orientation = "features_in_rows"
top_features = 120

[[modality]]
name = "protein"
path = "protein.tsv"
kind = "abundance"
orientation = "samples_in_rows"
top_features = 60

[subtypes]
counts = [2, 3]
min_size = 5

[resampling]
n_resamples = 4

[evaluation]
n_permutations = 100
markers_per_subtype = 5
gene_sets = "sets.tsv"
min_set_size = 3

[report]
title = '''{title}'''
formats = ["html"]
"""


def _write_hostile_cohort(folder: Path) -> Path:
    cohort = make_synthetic_cohort(n_patients=90, n_subtypes=3, seed=11)
    rename_patient = {p: f"{p}{PATIENT_SUFFIX}" for p in cohort.clinical.index}
    clinical = cohort.clinical.rename(index=rename_patient, columns={"stage": STAGE})
    clinical.to_csv(folder / "clinical.tsv", sep="\t", index_label="patient_id")
    rna = cohort.tables["rna"]
    rna = rna.rename(index=lambda f: f"{f}{FEATURE_SUFFIX}", columns=rename_patient)
    rna.to_csv(folder / "rna.tsv", sep="\t", index_label="feature_id")
    protein = cohort.tables["protein"].rename(index=rename_patient, columns=lambda f: f"{f}{FEATURE_SUFFIX}")
    protein.to_csv(folder / "protein.tsv", sep="\t", index_label="patient_id")
    lines = [
        "\t".join([f"{SET_PREFIX}{name}", description, *(f"{m}{FEATURE_SUFFIX}" for m in members)])
        for name, (description, members) in cohort.gene_sets.items()
    ]
    (folder / "sets.tsv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    (folder / "flow.toml").write_text(WORKFLOW.format(title=TITLE), encoding="utf-8")
    return folder / "flow.toml"


@pytest.mark.slow
def test_whole_run_escapes_user_strings_and_hides_patients(tmp_path):
    inputs = tmp_path / "inputs"
    inputs.mkdir()
    workflow = _write_hostile_cohort(inputs)
    assert main(["run", str(workflow), "--out", str(tmp_path / "run"), "--quiet"]) == 0
    page = (tmp_path / "run" / "report.html").read_text(encoding="utf-8")
    # html.escape (standard library) is the reference escaping; jinja2 writes &#34; / &#39; for quotes.
    normalised = page.replace("&#34;", "&quot;").replace("&#39;", "&#x27;")
    assert "<script" not in page.lower()
    for raw in (TITLE, STAGE, FEATURE_SUFFIX, SET_PREFIX.strip()):
        assert raw not in page
        assert html.escape(raw) in normalised, raw
    assert "CLB-" not in page and html.escape(PATIENT_SUFFIX) not in page
    _check_methods_against_the_run(tmp_path / "run", page)


def _check_methods_against_the_run(run, page):
    """The methods paragraph names what the run's results.json and manifest say it used."""
    results = json.loads((run / "results.json").read_text(encoding="utf-8"))
    manifest = json.loads((run / "manifest.json").read_text(encoding="utf-8"))
    methods = html.unescape(re.search(r'<p class="methods">(.*?)</p>', page, flags=re.S).group(1))
    methods = " ".join(methods.split())
    assert f"using strataweave {manifest['strataweave_version']}." in methods
    for modality in results["parameters"]["modalities"]:
        sentence = re.search(rf"Preprocessing of [^:]*\b{modality['name']}\b[^:]*: (.*?)\.\s(?=[A-Z])", methods)
        assert sentence, modality["name"]
        steps = sentence.group(1)
        assert f"the {modality['top_features']} features of highest variance (all, where fewer) were kept" in steps
        assert f"missing in more than {modality['max_missing_fraction']:.0%} of the patients" in steps
        assert {"median": "imputed by the feature median", "knn": "nearest patients",
                "none": "not imputed"}[modality["impute"]] in steps
    graph = results["parameters"]["graph"]
    assert f"keeping {graph['n_neighbours']} neighbours per patient" in methods
    assert f"{results['parameters']['resampling']['n_resamples']} resamples" in methods
    assert f"seed {results['parameters']['seed']}" in methods
