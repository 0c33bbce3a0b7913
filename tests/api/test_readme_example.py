"""The README's Python quick start runs and gives the CLI run's subtypes on the bundled cohort.

By default both sides run with fewer resamples (the same number on each, so the recommended
count is chosen from the same criteria); STRATAWEAVE_FULL_README=1 runs the example as written
against the bundled workflow as written (about two minutes).
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path

import pandas as pd
import pytest

from strataweave.cli import main

pytestmark = pytest.mark.slow

ROOT = Path(__file__).resolve().parents[2]
FULL = os.environ.get("STRATAWEAVE_FULL_README") == "1"
RESAMPLES = 2


def readme_example() -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    quick_start = text[text.index("### Python quick start"):]
    return re.search(r"```python\n(.*?)```", quick_start, re.S).group(1)


def fewer_resamples(code: str, pattern: str, replacement: str) -> str:
    changed, count = re.subn(pattern, replacement, code)
    assert count == 1, f"expected one {pattern!r} to change"
    return changed


@pytest.fixture(scope="module")
def runs(tmp_path_factory) -> dict:
    folder = tmp_path_factory.mktemp("readme")
    workflow = (ROOT / "workflows" / "synthetic_cohort.toml").read_text(encoding="utf-8")
    workflow = workflow.replace('"../synthetic_cohort/', f'"{ROOT / "synthetic_cohort"}/')
    workflow = fewer_resamples(workflow, r"formats = \[[^\]]*\]", "formats = []")
    code = readme_example()
    if not FULL:
        workflow = fewer_resamples(workflow, r"\nn_resamples = 50 ", f"\nn_resamples = {RESAMPLES} ")
        code = fewer_resamples(code, r"SubtypeSweep\(", f"SubtypeSweep(n_resamples={RESAMPLES}, ")
    (folder / "flow.toml").write_text(workflow, encoding="utf-8")
    assert main(["--quiet", "run", str(folder / "flow.toml"), "--out", str(folder / "cli")]) == 0
    cwd = os.getcwd()
    os.chdir(ROOT)
    try:
        code = code.replace('model.save("my_model")', f'model.save({str(folder / "my_model")!r})')
        namespace: dict = {}
        exec(compile(code, "README.md", "exec"), namespace)
    finally:
        os.chdir(cwd)
    return {"folder": folder, "python": namespace}


def test_the_readme_example_reproduces_the_cli_labels_exactly(runs):
    cli = pd.read_csv(runs["folder"] / "cli" / "assignments.tsv", sep="\t", comment="#", index_col="patient_id")
    python = runs["python"]["labels"]
    assert list(python.index) == list(cli.index)
    assert (python.to_numpy() == cli["subtype"].to_numpy()).all()
    scores = [c for c in cli.columns if c.startswith("score_")]
    assignments = runs["python"]["model"].assignments_
    pd.testing.assert_frame_equal(assignments[["confidence", *scores]], cli[["confidence", *scores]],
                                  check_names=False, rtol=1e-5)


def test_the_saved_model_places_patients_as_the_cli_assign(runs, capsys):
    folder, namespace = runs["folder"], runs["python"]
    cohort = namespace["cohort"]
    files = {"rna": "rna_counts.tsv.gz", "protein": "protein_abundance.tsv"}
    argv = ["--quiet", "assign", str(folder / "cli"), "--out", str(folder / "assigned.tsv")]
    for name, file in files.items():
        argv += ["--modality", f"{name}={ROOT / 'synthetic_cohort' / file}"]
    assert main(argv) == 0
    cli = pd.read_csv(folder / "assigned.tsv", sep="\t", comment="#", index_col="patient_id")
    loaded = namespace["sw"].SubtypeModel.load(folder / "my_model")
    python = loaded.predict({name: cohort.modality(name).raw for name in files})
    assert set(python["modalities_used"]) == {"rna,protein", "rna", "protein"}  # some patients lack one
    python = python.loc[cli.index]
    for column in ("subtype", "modalities_used", "far_from_subtypes"):
        assert (python[column] == cli[column]).all(), column
    pd.testing.assert_series_equal(python["confidence"], cli["confidence"], check_names=False, rtol=1e-5)


FINGERPRINT = Path(__file__).with_name("demo_fingerprint.json")


def _fingerprint(run: Path) -> dict:
    """The bundled cohort's subtypes and count criteria (at RESAMPLES resamples), in a comparable form."""
    labels = pd.read_csv(run / "assignments.tsv", sep="\t", comment="#", index_col="patient_id")["subtype"]
    criteria = pd.read_csv(run / "rank_selection.tsv", sep="\t", comment="#", index_col="count")
    return {"subtypes": labels.to_dict(),
            **{name: criteria[name].round(4).to_dict() for name in ("pac", "stability", "smallest_subtype")}}


@pytest.mark.skipif(FULL, reason="the fingerprint is of the run with fewer resamples")
def test_speed_work_leaves_the_demo_subtypes_and_criteria_as_they_were(runs):
    # A change meant to alter results rewrites the file (STRATAWEAVE_NEW_FINGERPRINT=1) and says so
    # in its commit; any other change must leave it as it is.
    found = json.loads(json.dumps(_fingerprint(runs["folder"] / "cli")))  # keys as JSON keeps them
    if os.environ.get("STRATAWEAVE_NEW_FINGERPRINT") == "1":
        FINGERPRINT.write_text(json.dumps(found, indent=1, sort_keys=True) + "\n", encoding="utf-8")
    expected = json.loads(FINGERPRINT.read_text(encoding="utf-8"))
    assert found["subtypes"] == expected["subtypes"]
    for name in ("pac", "stability", "smallest_subtype"):
        assert found[name] == pytest.approx(expected[name], abs=2e-4), name
