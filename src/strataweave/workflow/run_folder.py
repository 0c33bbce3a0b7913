"""The run folder: recognise it, refuse what is not one, never overwrite a finished run unasked.

A folder is a run folder when its `manifest.json` carries our format marker. The manifest
says whether the run finished; an unfinished run (interrupted, killed) is resumed by
running the same command again.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

from strataweave.errors import InputError
from strataweave.files import atomic_write_text

RUN_FORMAT = "strataweave run folder"
MANIFEST = "manifest.json"
OUTPUTS = (
    "results.json", "assignments.tsv", "rank_selection.tsv", "survival.tsv", "clinical.tsv", "enrichment.tsv",
    "report.html", "slides.pdf", "stages/figure_data.npz", "markers", "model", "figures",
)


class RunFolder:
    """Paths and manifest of one run folder."""

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)

    @property
    def stages(self) -> Path:
        return self.path / "stages"

    @property
    def manifest_path(self) -> Path:
        return self.path / MANIFEST

    def read_manifest(self) -> dict | None:
        """The manifest if this is one of our run folders, else None."""
        try:
            manifest = json.loads(self.manifest_path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        if not isinstance(manifest, dict) or manifest.get("format") != RUN_FORMAT:
            return None
        return manifest

    def write_manifest(self, manifest: dict) -> None:
        atomic_write_text(self.manifest_path, json.dumps(manifest, indent=2) + "\n")

    def clear_outputs(self) -> None:
        """Remove what an earlier run wrote here (never the stage cache), so nothing stale stays."""
        for name in OUTPUTS:
            path = self.path / name
            if path.is_dir():
                shutil.rmtree(path)
            else:
                path.unlink(missing_ok=True)


def prepare_run_folder(path: str | Path, overwrite: bool = False) -> RunFolder:
    """A run folder to write into: new, empty, or an unfinished (or, if asked, finished) run."""
    folder = RunFolder(Path(path).expanduser().resolve())
    if folder.path.exists() and not folder.path.is_dir():
        raise InputError(f"{folder.path}: exists and is not a folder, expected a new or run folder for --out")
    if folder.path.is_dir() and any(folder.path.iterdir()):
        manifest = folder.read_manifest()
        if manifest is None:
            raise InputError(
                f"{folder.path}: folder is not empty and has no run manifest, expected a new, empty or run folder for --out"
            )
        if manifest.get("status") == "finished" and not overwrite:
            raise InputError(
                f"{folder.path}: holds a finished run, expected a new folder (or pass --overwrite to replace it)"
            )
    folder.stages.mkdir(parents=True, exist_ok=True)
    return folder


def finished_run(path: str | Path) -> RunFolder:
    """An existing, finished run folder to read from (assign, compare, report)."""
    folder = RunFolder(Path(path).expanduser().resolve())
    manifest = folder.read_manifest()
    if manifest is None:
        raise InputError(f"{folder.path}: no run manifest found, expected a run folder written by 'strataweave run'")
    if manifest.get("status") != "finished":
        raise InputError(
            f"{folder.path}: manifest status is {manifest.get('status')!r}, expected 'finished' (rerun the command to finish it)"
        )
    return folder
