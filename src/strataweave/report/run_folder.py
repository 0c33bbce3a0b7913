"""Read a finished run folder into one object the figures, HTML and slides draw from."""

from __future__ import annotations

import json
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from strataweave.errors import InputError
from strataweave.report.contract import (
    FIGURE_DATA_FILE,
    MANIFEST_FILE,
    RESULTS_FILE,
    check_figure_data,
    check_manifest,
    check_results,
    survival_groups,
)


NOT_RUN_NAMES = {"graph_agreement": "Agreement between modality graphs", "survival": "Survival",
                 "clinical": "Clinical association", "markers": "Markers", "enrichment": "Gene-set enrichment"}


def not_run_name(name: str) -> str:
    """A key of results.json's not_run in words: 'Survival', 'Markers of rna', ..."""
    section, _, modality = name.partition("/")
    words = NOT_RUN_NAMES.get(section, section.replace("_", " ").capitalize())
    return f"{words} of {modality}" if modality else words


@dataclass(frozen=True)
class RunView:
    """What the report knows about a run: results.json, figure arrays and the manifest."""

    run_dir: Path
    results: dict[str, Any]
    arrays: dict[str, np.ndarray]
    manifest: dict[str, Any]

    @property
    def labels(self) -> list[str]:
        """Display names of the final subtypes; position = subtype code."""
        return list(self.results["subtypes"]["labels"])

    @property
    def title(self) -> str:
        return self.results.get("report", {}).get("title") or "Patient stratification run"

    @property
    def show_patient_ids(self) -> bool:
        return bool(self.results.get("report", {}).get("show_patient_ids", False)) and "patient_ids" in self.arrays

    @property
    def groups_given(self) -> bool:
        """True when the grouping came from the user (evaluate), not from the run's own subtypes."""
        return bool(self.results["subtypes"].get("given", False))

    @property
    def group_word(self) -> str:
        return "group" if self.groups_given else "subtype"

    @property
    def has_modalities(self) -> bool:
        return bool(self.results["cohort"]["modalities"])

    @property
    def survival_groups(self) -> list[str]:
        return survival_groups(self.results)

    @property
    def covariates(self) -> list[str]:
        """The clinical columns the Cox model was adjusted for."""
        evaluation = (self.results.get("parameters") or {}).get("evaluation") or {}
        return [str(c) for c in evaluation.get("covariates") or []]

    def has(self, section: str) -> bool:
        """True when results.json carries this optional section (and it is not empty)."""
        return bool(self.results.get(section))

    @property
    def not_run(self) -> dict[str, str]:
        """Analyses the run left out, by section name or markers/<modality>: 'not run: <reason>'."""
        return {str(name): str(reason) for name, reason in (self.results.get("not_run") or {}).items()}

    def not_run_sentences(self, section: str | None = None) -> list[str]:
        """'<Analysis>: not run: <reason>' for each analysis left out; with `section`, only that
        section's (for markers also each modality's, markers/<modality>)."""
        return [f"{not_run_name(name)}: {reason}" for name, reason in self.not_run.items()
                if section is None or name == section or name.startswith(f"{section}/")]


def _read_json(path: Path) -> Any:
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(f"{path}: file not found; expected a run folder written by `strataweave run`") from None
    except json.JSONDecodeError as error:
        raise InputError(f"{path}: line {error.lineno}: not valid JSON ({error.msg})") from None


def _read_arrays(path: Path) -> dict[str, np.ndarray]:
    try:
        with np.load(path, allow_pickle=False) as npz:
            return {name: npz[name] for name in npz.files}
    except FileNotFoundError:
        raise InputError(f"{path}: file not found; expected the figure data of the run") from None
    except (ValueError, OSError, zipfile.BadZipFile) as error:
        raise InputError(f"{path}: not a readable .npz of plain arrays ({error})") from None


def load_run(run_dir: str | Path) -> RunView:
    """Read and check results.json, stages/figure_data.npz and manifest.json (optional)."""
    run_dir = Path(run_dir)
    results = _read_json(run_dir / RESULTS_FILE)
    check_results(results, source=str(run_dir / RESULTS_FILE))
    arrays = _read_arrays(run_dir / FIGURE_DATA_FILE)
    check_figure_data(arrays, results, source=str(run_dir / FIGURE_DATA_FILE))
    manifest_path = run_dir / MANIFEST_FILE
    manifest = _read_json(manifest_path) if manifest_path.exists() else {}
    check_manifest(manifest, source=str(manifest_path))
    return RunView(run_dir=run_dir, results=results, arrays=arrays, manifest=manifest)
