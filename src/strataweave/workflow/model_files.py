"""model/: the run's SubtypeModel (fitted preprocessing, joint NMF, subtype centres), as JSON plus `.npz`."""

from __future__ import annotations

from pathlib import Path

from strataweave.data.preprocess import Preprocessor
from strataweave.subtypes.model import ModelModality, SubtypeModel
from strataweave.workflow.config import Workflow
from strataweave.workflow.sweeping import model_from_record


def run_model(flow: Workflow, prepared: dict, fitted: dict) -> SubtypeModel:
    """The final fit of a run with every modality's fitted preprocessing, weight and file layout."""
    modalities = [
        ModelModality(m.name, m.kind, m.weight, m.orientation,
                      Preprocessor.from_state(**prepared["preprocessors"][m.name]))
        for m in flow.modalities
    ]
    return SubtypeModel(model_from_record(fitted["model"]), modalities, fitted["names"], fitted["centres"],
                        fitted["far_threshold"], len(prepared["patients"]))


def write_model(folder: Path, flow: Workflow, prepared: dict, fitted: dict) -> None:
    """Save the run's model into `folder` (what `strataweave assign` reads)."""
    run_model(flow, prepared, fitted).save(folder)
