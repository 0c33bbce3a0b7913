"""SubtypeModel: the subtypes found at one count, able to place new patients; saved as JSON + npz.

New tables go through each modality's fitted preprocessing (when the model has it), the
patient factor is found with the loadings held fixed (no graph), and each patient is scored
against the subtype centres (see `projection`). A patient measured on fewer modalities is
placed from those it has, its confidence scaled by its share of the modality weight; one
farther from its nearest subtype than 99 % of the training patients is flagged.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from strataweave.caution import CAUTION
from strataweave.codec import prefixed, unprefixed
from strataweave.data.preprocess import Preprocessor
from strataweave.errors import InputError
from strataweave.factorize import JointNMF
from strataweave.files import read_checked, write_checked
from strataweave.subtypes.projection import margin, placement, project_patients, subtype_scores
from strataweave.subtypes.result import named_assignments, subtype_names

MODEL_FORMAT = "strataweave.model/1"
MODEL_JSON = "model.json"
MODEL_ARRAYS = "arrays.npz"
MODALITY_KEYS = ("name", "kind", "orientation", "weight", "preprocessor")


@dataclass(frozen=True)
class ModelModality:
    """One modality of a model: its weight, the file layout of its tables, its fitted preprocessing."""

    name: str
    kind: str
    weight: float = 1.0
    orientation: str | None = None
    preprocessor: Preprocessor | None = None

    @property
    def n_features(self) -> int | None:
        return None if self.preprocessor is None else len(self.preprocessor.output_features_)


class SubtypeModel:
    """Fitted subtypes: `factorization_` (JointNMF), `modalities_`, `names_`, `centres_`,
    `far_threshold_`, `training_patients_` and, when built from a fit, `assignments_`
    (training patients: subtype, confidence, own_consensus, core, score per subtype)."""

    def __init__(self, factorization: JointNMF, modalities: list[ModelModality], names: list[str],
                 centres: np.ndarray, far_threshold: float, training_patients: int,
                 assignments: pd.DataFrame | None = None) -> None:
        self.factorization_ = factorization
        self.modalities_ = list(modalities)
        self.names_ = list(names)
        self.centres_ = np.asarray(centres, dtype=np.float64)
        self.far_threshold_ = float(far_threshold)
        self.training_patients_ = int(training_patients)
        self.assignments_ = assignments

    @classmethod
    def from_fit(cls, factorization: JointNMF, views: list, assignments: pd.DataFrame,
                 modalities: list[ModelModality]) -> SubtypeModel:
        """The model of one full-data fit: `views` are its aligned inputs, `assignments` the
        sweep's table at that count (integer `subtype` codes)."""
        count = sum(1 for column in assignments.columns if str(column).startswith("score_"))
        projected = project_patients(factorization, views)
        centres, far = placement(projected, assignments["subtype"].to_numpy(), count)
        return cls(factorization, modalities, subtype_names(count), centres, far, len(assignments),
                   named_assignments(assignments))

    @property
    def n_subtypes(self) -> int:
        return len(self.names_)

    @property
    def labels_(self) -> pd.Series:
        """Subtype name of each training patient (needs `assignments_`)."""
        if self.assignments_ is None:
            raise InputError("SubtypeModel: no training assignments (a loaded model); expected a fitted one")
        return self.assignments_["subtype"]

    def _model_inputs(self, views: Mapping[str, pd.DataFrame], sources: Mapping[str, str]) -> dict[str, pd.DataFrame]:
        known = [m.name for m in self.modalities_]
        unknown = [name for name in views if name not in known]
        if unknown or not views:
            found = repr(unknown[0]) if unknown else "none"
            raise InputError(f"views: found modality {found}; expected some of the model's: {', '.join(known)}")
        inputs = {}
        for modality in self.modalities_:
            if modality.name in views:
                frame = views[modality.name]
                if modality.preprocessor is not None:
                    source = sources.get(modality.name, f"modality {modality.name!r}")
                    frame = modality.preprocessor.transform(frame, source=source)
                inputs[modality.name] = frame
        return inputs

    def predict(self, views: Mapping[str, pd.DataFrame], sources: Mapping[str, str] | None = None) -> pd.DataFrame:
        """Place new patients: `views` maps modality name -> patients x features table (raw, as
        read from files, when the model has its preprocessing; else model inputs); a
        modality may be left out. One row per patient: subtype, confidence, score per
        subtype, modalities_used, far_from_subtypes. `sources` names each table in messages."""
        inputs = self._model_inputs(views, sources or {})
        patients = pd.Index([]).append([frame.index for frame in inputs.values()]).unique()
        arrays = []
        for v, modality in enumerate(self.modalities_):
            width = self.factorization_.components_[v].shape[1]
            if modality.name in inputs:
                arrays.append(inputs[modality.name].reindex(patients).to_numpy(dtype=np.float64))
            else:
                arrays.append(np.full((len(patients), width), np.nan))
        present = np.column_stack([np.isfinite(values).any(axis=1) for values in arrays])
        scores = subtype_scores(project_patients(self.factorization_, arrays), self.centres_)
        weights = np.array([m.weight for m in self.modalities_], dtype=np.float64)
        coverage = (present * weights).sum(axis=1) / weights.sum()
        names = np.asarray(self.names_, dtype=object)
        table = pd.DataFrame(
            {"subtype": names[scores.argmax(axis=1)], "confidence": margin(scores) * coverage},
            index=pd.Index(patients, name="patient_id"),
        )
        for code, name in enumerate(self.names_):
            table[f"score_{name}"] = scores[:, code]
        table["modalities_used"] = [
            ",".join(m.name for m, has in zip(self.modalities_, row) if has) for row in present
        ]
        table["far_from_subtypes"] = (1.0 - scores.max(axis=1)) > self.far_threshold_
        return table

    def to_state(self) -> tuple[dict, dict[str, np.ndarray]]:
        """(model.json content, arrays.npz content)."""
        arrays: dict[str, np.ndarray] = {"centres": self.centres_}
        modalities = []
        for i, modality in enumerate(self.modalities_):
            state = None
            if modality.preprocessor is not None:
                state, parts = modality.preprocessor.to_state()
                arrays.update(prefixed(f"m{i}_", parts))
            modalities.append({"name": modality.name, "kind": modality.kind, "orientation": modality.orientation,
                               "weight": modality.weight, "preprocessor": state})
        factorization, parts = self.factorization_.to_state()
        arrays.update(prefixed("nmf_", parts))
        description = {
            "format": MODEL_FORMAT,
            "caution": CAUTION,
            "modalities": modalities,
            "factorization": factorization,
            "subtypes": self.names_,
            "far_threshold": self.far_threshold_,
            "training_patients": self.training_patients_,
        }
        return description, arrays

    @classmethod
    def from_state(cls, description: dict, arrays: Mapping[str, np.ndarray], source: str = "saved model") -> SubtypeModel:
        """The model that `to_state` described; a damaged description is an InputError naming the key."""
        found = description.get("format") if isinstance(description, dict) else description
        if found != MODEL_FORMAT:
            raise InputError(f"{source}: key 'format': found {found!r}, expected {MODEL_FORMAT!r}")
        try:
            modalities = []
            for i, entry in enumerate(description["modalities"]):
                missing = [key for key in MODALITY_KEYS if key not in entry]
                if missing:
                    raise KeyError(missing[0])
                state = entry["preprocessor"]
                preprocessor = None if state is None else Preprocessor.from_state(state, unprefixed(f"m{i}_", arrays))
                modalities.append(ModelModality(entry["name"], entry["kind"], float(entry["weight"]),
                                                entry["orientation"], preprocessor))
            factorization = JointNMF.from_state(description["factorization"], unprefixed("nmf_", arrays))
            return cls(factorization, modalities, description["subtypes"], arrays["centres"],
                       description["far_threshold"], description["training_patients"])
        except (KeyError, TypeError) as problem:  # hand-edited or truncated, not a fault of the program
            raise InputError(
                f"{source}: lacks or garbles {problem}, expected model.json and arrays.npz as SubtypeModel.save wrote them"
            ) from None

    def save(self, folder: str | Path) -> Path:
        """Write `folder`/model.json and `folder`/arrays.npz (no pickle, sha256 of both in model.json)."""
        folder = Path(folder)
        description, arrays = self.to_state()
        write_checked(folder / MODEL_JSON, folder / MODEL_ARRAYS, description, arrays, indent=1)
        return folder

    @classmethod
    def load(cls, folder: str | Path) -> SubtypeModel:
        """The model that `save` wrote into `folder`; DamagedFileError naming a file that does not read back."""
        folder = Path(folder)
        description, arrays = read_checked(folder / MODEL_JSON, folder / MODEL_ARRAYS)
        return cls.from_state(description, arrays, source=str(folder))

    def _repr_html_(self) -> str:
        kept = ", ".join(m.name for m in self.modalities_)
        return (f"<p><b>SubtypeModel</b>: {self.n_subtypes} subtypes ({', '.join(self.names_)}) "
                f"from {self.training_patients_} patients on {kept}. {CAUTION}</p>")
