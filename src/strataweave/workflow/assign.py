"""`strataweave assign`: newly profiled patients placed into the subtypes of a finished run.

Each new matrix is transformed by the run's fitted preprocessing of its modality, the
patient factor is found with the run's loadings held fixed, and each patient is scored
against the subtype centres. A patient measured on fewer modalities is assigned from those
it has, and its confidence is scaled by the share of the modality weight it has. A patient
farther from its nearest subtype than 99% of the training patients is flagged.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from strataweave.data.readers import read_matrix
from strataweave.errors import InputError
from strataweave.workflow.model_files import SavedModel
from strataweave.workflow.projection import margin, project_patients, subtype_scores
from strataweave.workflow.run_folder import finished_run


def _read_new_matrix(path: Path, modality: dict, features: np.ndarray) -> pd.DataFrame:
    """Patients x features of one new file; an omitted orientation is told by the training features."""
    orientation = modality["orientation"] or "samples_in_rows"
    frame = read_matrix(path, orientation=orientation, name=modality["name"], kind=modality["kind"])
    if modality["orientation"] is None:
        in_columns = int(frame.columns.isin(features).sum())
        in_rows = int(frame.index.isin(features).sum())
        if in_rows > in_columns:
            frame = frame.T.rename_axis(index="patient_id", columns="feature")
    if not frame.columns.isin(features).any():
        raise InputError(
            f"{path} (modality {modality['name']!r}): found no feature of the run's {modality['name']!r} data "
            f"(first: {frame.columns[0]!r}), expected features such as {features[0]!r}"
        )
    return frame


def assign_new_patients(run_dir: str | Path, files: dict[str, str | Path]) -> pd.DataFrame:
    """One row per new patient: patient_id, subtype, confidence, score per subtype, modalities, far flag."""
    folder = finished_run(run_dir)
    model = SavedModel(folder.path / "model")
    known = [m["name"] for m in model.modalities]
    for name in files:
        if name not in known:
            raise InputError(f"--modality {name}=...: found modality {name!r}, expected one of the run's: {', '.join(known)}")
    transformed = {}
    for modality in model.modalities:
        if modality["name"] in files:
            preprocessor = model.preprocessors[modality["name"]]
            path = Path(files[modality["name"]])
            raw = _read_new_matrix(path, modality, preprocessor.input_features_)
            transformed[modality["name"]] = preprocessor.transform(raw, source=str(path))
    patients = pd.Index([]).append([frame.index for frame in transformed.values()]).unique()
    views = [
        transformed[m["name"]].reindex(patients).to_numpy(dtype=np.float64) if m["name"] in transformed
        else np.full((len(patients), len(model.preprocessors[m["name"]].output_features_)), np.nan)
        for m in model.modalities
    ]
    present = [np.isfinite(values).any(axis=1) for values in views]
    W = project_patients(model.factorization, views)
    scores = subtype_scores(W, model.centres)
    weights = np.array([m["weight"] for m in model.modalities], dtype=np.float64)
    coverage = (np.column_stack(present) * weights).sum(axis=1) / weights.sum()
    names = np.asarray(model.names, dtype=object)
    table = pd.DataFrame(
        {
            "patient_id": patients,
            "subtype": names[scores.argmax(axis=1)],
            "confidence": margin(scores) * coverage,
        }
    )
    for code, name in enumerate(model.names):
        table[f"score_{name}"] = scores[:, code]
    table["modalities_used"] = [
        ",".join(m["name"] for m, has in zip(model.modalities, row) if has) for row in np.column_stack(present)
    ]
    table["far_from_subtypes"] = (1.0 - scores.max(axis=1)) > model.far_threshold
    return table
