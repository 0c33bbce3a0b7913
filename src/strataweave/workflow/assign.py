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
from strataweave.workflow.run_folder import check_new_file, finished_run


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



def check_table_out(out: Path, run_dir: str | Path, files: dict[str, str | Path], force: bool = False) -> None:
    """Refuse an `--out` that is an input (of this command or of the run), a file of a finished run, or
    (without `force`) an existing file."""
    manifest = finished_run(run_dir).read_manifest()
    check_new_file(out, [*files.values(), *manifest.get("inputs", {}), manifest.get("workflow", {}).get("path", "")], force)
