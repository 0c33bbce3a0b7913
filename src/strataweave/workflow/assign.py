"""`strataweave assign`: newly profiled patients placed into the subtypes of a finished run.

The files are read as the run read its own (kind, orientation); the run's saved
`SubtypeModel` does the rest (see `strataweave.subtypes.model`).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from strataweave.data.readers import read_matrix
from strataweave.errors import InputError
from strataweave.subtypes.model import ModelModality, SubtypeModel
from strataweave.workflow.run_folder import RunFolder, finished_run


def _read_new_matrix(path: Path, modality: ModelModality, features: np.ndarray) -> pd.DataFrame:
    """Patients x features of one new file; an omitted orientation is told by the training features."""
    orientation = modality.orientation or "samples_in_rows"
    frame = read_matrix(path, orientation=orientation, name=modality.name, kind=modality.kind)
    if modality.orientation is None:
        in_columns = int(frame.columns.isin(features).sum())
        in_rows = int(frame.index.isin(features).sum())
        if in_rows > in_columns:
            frame = frame.T.rename_axis(index="patient_id", columns="feature")
    if not frame.columns.isin(features).any():
        raise InputError(
            f"{path} (modality {modality.name!r}): found no feature of the run's {modality.name!r} data "
            f"(first: {frame.columns[0]!r}), expected features such as {features[0]!r}"
        )
    return frame


def assign_new_patients(run_dir: str | Path, files: dict[str, str | Path]) -> pd.DataFrame:
    """One row per new patient: patient_id, subtype, confidence, score per subtype, modalities, far flag."""
    folder = finished_run(run_dir)
    model = SubtypeModel.load(folder.path / "model")
    known = [m.name for m in model.modalities_]
    for name in files:
        if name not in known:
            raise InputError(f"--modality {name}=...: found modality {name!r}, expected one of the run's: {', '.join(known)}")
    raw = {
        m.name: _read_new_matrix(Path(files[m.name]), m, m.preprocessor.input_features_)
        for m in model.modalities_ if m.name in files
    }
    return model.predict(raw, sources={name: str(path) for name, path in files.items()}).reset_index()


def _same_file(a: Path, b: Path) -> bool:
    return a == b or (a.exists() and b.exists() and a.samefile(b))


def check_table_out(out: Path, run_dir: str | Path, files: dict[str, str | Path], force: bool = False) -> None:
    """Refuse an `--out` that is an input (of this command or of the run) or inside a finished run folder;
    an existing other file only with `force`."""
    target = Path(out).expanduser().resolve()
    manifest = finished_run(run_dir).read_manifest()
    inputs = [*files.values(), *manifest.get("inputs", {}), manifest.get("workflow", {}).get("path", "")]
    if any(_same_file(target, Path(path).expanduser().resolve()) for path in inputs if path):
        raise InputError(f"{out}: is an input of this command or of the run, expected a new file for --out")
    for parent in target.parents:
        if (RunFolder(parent).read_manifest() or {}).get("status") == "finished":
            raise InputError(f"{out}: is inside the finished run folder {parent}, expected a path outside any run folder")
    if target.is_dir():
        raise InputError(f"{out}: is a folder, expected a file path for --out")
    if target.exists() and not force:
        raise InputError(f"{out}: already exists, expected a new file (or pass --force to replace it)")
