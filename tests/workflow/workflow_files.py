"""Invented input files for the workflow tests (importable helper, not a test module)."""

from __future__ import annotations

from pathlib import Path

from strataweave.data.synthetic import make_synthetic_cohort

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


LAYERS = {  # name: (kind, orientation of the synthetic cohort's table)
    "rna": ("counts", "features_in_rows"),
    "protein": ("abundance", "samples_in_rows"),
    "mirna": ("counts", "samples_in_rows"),
}
SURVIVAL = ("os_months", "os_event")
SETTINGS = """
[factorization]
n_restarts = 1
max_iter = 100

[subtypes]
counts = [2, 3]
min_size = 3
{use_count}
[resampling]
n_resamples = 4
resample_restarts = 1

[evaluation]
n_permutations = 50
n_monte_carlo = 100

[report]
formats = {formats}
"""


def write_workflow(folder: Path, modalities: dict[str, tuple[str, str]], survival: bool,
                   formats: str = '["html"]', use_count: int | None = None) -> Path:
    """flow.toml in `folder` reading clinical.tsv and <name>.tsv of each modality there."""
    text = 'seed = 5\n[cohort]\nclinical = "clinical.tsv"\n'
    if survival:
        text += f'time_column = "{SURVIVAL[0]}"\nevent_column = "{SURVIVAL[1]}"\n'
    for name, (kind, orientation) in modalities.items():
        text += (f'\n[[modality]]\nname = "{name}"\npath = "{name}.tsv"\nkind = "{kind}"\n'
                 f'orientation = "{orientation}"\ntop_features = 60\n')
    use = f"use_count = {use_count}\n" if use_count else ""
    (folder / "flow.toml").write_text(text + SETTINGS.format(formats=formats, use_count=use), encoding="utf-8")
    return folder / "flow.toml"


def write_synthetic_inputs(folder: Path, layers: tuple[str, ...], clinical_columns: list[str] | None = None,
                           survival: bool = True, formats: str = '["html"]') -> Path:
    """An invented 90-patient, 3-subtype cohort with the layers asked for; returns the workflow."""
    folder.mkdir(parents=True, exist_ok=True)
    cohort = make_synthetic_cohort(n_patients=90, n_subtypes=3, seed=5)
    clinical = cohort.clinical if clinical_columns is None else cohort.clinical[clinical_columns]
    clinical.to_csv(folder / "clinical.tsv", sep="\t", index_label="patient_id")
    for name in layers:
        cohort.tables[name].to_csv(folder / f"{name}.tsv", sep="\t")
    return write_workflow(folder, {name: LAYERS[name] for name in layers}, survival, formats)
