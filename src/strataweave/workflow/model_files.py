"""model/: what `assign` needs to place new patients, as JSON plus one `.npz` (no pickle).

model.json holds the modalities in training order with their fitted preprocessing, the
factorisation state, the subtype names and the far-from-every-subtype threshold; arrays.npz
holds the arrays those states refer to (prefixed per part) and the subtype centres.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from strataweave.caution import CAUTION
from strataweave.data.preprocess import Preprocessor
from strataweave.errors import InputError
from strataweave.factorize import JointNMF
from strataweave.files import atomic_write_arrays, atomic_write_text
from strataweave.workflow.config import Workflow

MODEL_FORMAT = "strataweave.model/1"
MODEL_JSON = "model.json"
MODEL_ARRAYS = "arrays.npz"
MODALITY_KEYS = ("name", "kind", "orientation", "weight", "preprocessor")


def _prefixed(prefix: str, arrays: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    return {f"{prefix}{name}": np.asarray(value) for name, value in arrays.items()}


def _unprefixed(prefix: str, arrays: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    return {name[len(prefix):]: value for name, value in arrays.items() if name.startswith(prefix)}


def write_model(folder: Path, flow: Workflow, prepared: dict, fitted: dict) -> None:
    """Save the fitted preprocessing of every modality, the joint NMF and the subtype centres."""
    arrays: dict[str, np.ndarray] = {"centres": fitted["centres"]}
    modalities = []
    for i, modality in enumerate(flow.modalities):
        saved = prepared["preprocessors"][modality.name]
        arrays.update(_prefixed(f"m{i}_", saved["arrays"]))
        modalities.append(
            {"name": modality.name, "kind": modality.kind, "orientation": modality.orientation,
             "weight": modality.weight, "preprocessor": saved["state"]}
        )
    arrays.update(_prefixed("nmf_", fitted["model"]["arrays"]))
    model = {
        "format": MODEL_FORMAT,
        "caution": CAUTION,
        "modalities": modalities,
        "factorization": fitted["model"]["state"],
        "subtypes": list(fitted["names"]),
        "far_threshold": fitted["far_threshold"],
        "training_patients": int(len(prepared["patients"])),
    }
    atomic_write_arrays(folder / MODEL_ARRAYS, arrays)
    atomic_write_text(folder / MODEL_JSON, json.dumps(model, indent=1) + "\n")


class SavedModel:
    """A model folder read back: preprocessors by modality, the joint NMF, centres, names."""

    def __init__(self, folder: Path) -> None:
        try:
            description = json.loads((folder / MODEL_JSON).read_text(encoding="utf-8"))
            with np.load(folder / MODEL_ARRAYS, allow_pickle=False) as archive:
                arrays = {name: archive[name] for name in archive.files}
        except (OSError, ValueError) as problem:
            raise InputError(f"{folder}: no readable saved model ({problem}), expected model.json and arrays.npz") from None
        found = description.get("format") if isinstance(description, dict) else description
        if found != MODEL_FORMAT:
            raise InputError(f"{folder / MODEL_JSON}: key 'format': found {found!r}, expected {MODEL_FORMAT!r}")
        try:
            self._read(description, arrays)
        except (KeyError, TypeError) as problem:  # a hand-edited or truncated model, not a fault of the program
            raise InputError(
                f"{folder}: saved model lacks or garbles {problem}, expected model.json and arrays.npz as a run wrote them"
            ) from None

    def _read(self, description: dict, arrays: dict[str, np.ndarray]) -> None:
        self.modalities = description["modalities"]
        for modality in self.modalities:
            missing = [name for name in MODALITY_KEYS if name not in modality]
            if missing:
                raise KeyError(missing[0])
        self.names = list(description["subtypes"])
        self.far_threshold = float(description["far_threshold"])
        self.centres = arrays["centres"]
        self.preprocessors = {
            m["name"]: Preprocessor.from_state(m["preprocessor"], _unprefixed(f"m{i}_", arrays))
            for i, m in enumerate(self.modalities)
        }
        self.factorization = JointNMF.from_state(description["factorization"], _unprefixed("nmf_", arrays))
