"""Invented input files for the workflow tests (importable helper, not a test module)."""

from __future__ import annotations

from pathlib import Path

MINIMAL = """\
[cohort]
clinical = "clinical.tsv"

[[modality]]
name = "rna"
path = "rna.tsv"
kind = "log_expression"
"""


def write_tiny_files(folder: Path) -> Path:
    """An invented clinical table, one small matrix and a minimal workflow in `folder`."""
    (folder / "clinical.tsv").write_text(
        "patient_id\tage\tos_months\tos_event\n" + "".join(f"P{i}\t{50 + i}\t{10 + i}\t{i % 2}\n" for i in range(6))
    )
    (folder / "rna.tsv").write_text(
        "feature\t" + "\t".join(f"P{i}" for i in range(6)) + "\n"
        + "".join(f"G{j}\t" + "\t".join(str(i * j % 7) for i in range(6)) + "\n" for j in range(5))
    )
    (folder / "flow.toml").write_text(MINIMAL)
    return folder
