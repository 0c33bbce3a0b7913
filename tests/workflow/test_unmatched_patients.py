"""Modality patients outside the clinical table are reported by `check` and in results.json, never merged."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from strataweave.cli import main
from strataweave.data.cohort import CASE_ONLY, NOT_IN_CLINICAL
from strataweave.report.contract import check_results

CLINICAL = [f"P{i}" for i in range(8)]
# p7 differs from the clinical P7 only in case; X9 is in no clinical row.
MEASURED = [f"P{i}" for i in range(7)] + ["p7", "X9"]


def _write_inputs(folder: Path, show_patient_ids: bool) -> Path:
    (folder / "clinical.tsv").write_text(
        "patient_id\tage\n" + "".join(f"{p}\t{50 + i}\n" for i, p in enumerate(CLINICAL))
    )
    (folder / "rna.tsv").write_text(
        "feature\t" + "\t".join(MEASURED) + "\n"
        + "".join(f"G{j}\t" + "\t".join(str((i + 1) * (j + 2) % 7) for i in range(len(MEASURED))) + "\n"
                  for j in range(5))
    )
    (folder / "groups.tsv").write_text("patient_id\tsubtype\n" + "".join(
        f"{p}\t{'AB'[i % 2]}\n" for i, p in enumerate(CLINICAL[:7])
    ))
    flag = "true" if show_patient_ids else "false"
    (folder / "flow.toml").write_text(
        '[cohort]\nclinical = "clinical.tsv"\n[[modality]]\nname = "rna"\npath = "rna.tsv"\nkind = "log_expression"\n'
        f"[evaluation]\nn_monte_carlo = 100\n[report]\nformats = []\nshow_patient_ids = {flag}\n"
    )
    return folder / "flow.toml"


def test_check_lists_a_case_only_twin_without_merging_it(tmp_path, capsys) -> None:
    flow = _write_inputs(tmp_path, show_patient_ids=False)
    assert main(["check", str(flow)]) == 0
    out = capsys.readouterr().out
    assert "patients in the analysis (clinical and at least one modality): 7" in out
    assert "modality patients left out of the analysis (not merged): 2" in out
    listed = [line.split() for line in out.splitlines() if line.split()[:2] in (["rna", "p7"], ["rna", "X9"])]
    assert listed == [["rna", "p7", *CASE_ONLY.split(), "P7"], ["rna", "X9", *NOT_IN_CLINICAL.split()]]


@pytest.mark.parametrize("show_patient_ids", [False, True])
def test_results_json_counts_left_out_patients_and_names_them_only_when_allowed(tmp_path, show_patient_ids) -> None:
    flow = _write_inputs(tmp_path, show_patient_ids)
    out = tmp_path / "run"
    assert main(["evaluate", str(flow), "--groups", str(tmp_path / "groups.tsv"), "--out", str(out), "--quiet"]) == 0
    text = (out / "results.json").read_text()
    results = json.loads(text)
    check_results(results)
    cohort = results["cohort"]
    assert cohort["patients"] == 7 and cohort["modalities"][0]["patients"] == 7
    assert sorted((row["reason"], row["patients"]) for row in cohort["unmatched"]) == [
        (CASE_ONLY, 1), (NOT_IN_CLINICAL, 1)
    ]
    assert cohort["left_out_not_in_clinical"] == {"rna": 2}
    assignments = pd.read_csv(out / "assignments.tsv", sep="\t", comment="#", dtype=str)
    assert "P7" not in set(assignments["patient_id"]) and "p7" not in set(assignments["patient_id"])
    if show_patient_ids:
        twins = {row["patient_id"]: row["clinical_id"] for row in cohort["unmatched_patients"]}
        assert twins == {"p7": "P7", "X9": ""}
    else:
        assert "unmatched_patients" not in cohort and '"p7"' not in text and '"X9"' not in text
