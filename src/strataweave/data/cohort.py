"""The Cohort: one Modality per omics layer plus the clinical table, aligned on patient IDs."""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import pandas as pd

from strataweave.data.normalise import failed_libraries
from strataweave.data.positions import TablePositions, input_error, shown
from strataweave.data.preprocess import Preprocessor
from strataweave.data.validation import check_identifiers, check_kind, check_patient_count, checked_frame

DEFAULT_MIN_PATIENTS = 10
NOT_IN_CLINICAL = "not in the clinical table"
CASE_ONLY = "differs only in case from a clinical ID"
FAILED_LIBRARY = "failed library: no reads on more than half of the features"


@dataclass(frozen=True)
class Modality:
    """One omics layer: `data` is patients x features (float) as the model uses it.

    `preprocessor` is the fitted Preprocessor that made `data` from `raw` (both optional:
    data may arrive already prepared). `source` names where it came from, for messages.
    `set_aside` holds the patients measured but left out as failed libraries (counts only).
    """

    name: str
    kind: str
    data: pd.DataFrame
    source: str = ""
    preprocessor: Preprocessor | None = None
    raw: pd.DataFrame | None = None
    set_aside: pd.Index = field(default_factory=lambda: pd.Index([], dtype=object))

    def __post_init__(self):
        check_kind(self.kind, self.label)

    @property
    def label(self) -> str:
        """How messages name this modality: its source and name."""
        return f"{self.source} (modality {shown(self.name)})" if self.source else f"modality {shown(self.name)}"


def prepare_modality(
    name: str, kind: str, raw: pd.DataFrame, *, source: str = "", patients: pd.Index | None = None, **options
) -> Modality:
    """Fit a Preprocessor(kind, **options) on `raw` and wrap the result as a Modality.

    When `patients` is given (usually the clinical IDs) only those rows shape the fitted
    parameters; every row is still transformed, so that the Cohort can report the others.
    Counts normalised by the median ratio first set aside failed libraries (see
    `normalise.failed_libraries`): they are listed in `set_aside`, not modelled.
    """
    label = f"{source} (modality {shown(name)})" if source else f"modality {shown(name)}"
    preprocessor = Preprocessor(kind, **options)
    set_aside = pd.Index([], dtype=object)
    if kind == "counts" and preprocessor.library_size == "median_ratio":
        checked = checked_frame(raw, label, kind)
        failed = failed_libraries(checked.to_numpy())
        set_aside, raw = checked.index[failed], checked.loc[~failed]
    used = raw if patients is None else raw.loc[raw.index.astype(str).str.strip().isin(patients)]
    if used.empty:
        raise input_error(label, "patients", "no patient shared with the clinical table", "shared patient IDs")
    check_patient_count(len(used), 2, label)  # one patient has no variance: say so, not "no feature left"
    preprocessor.fit(used, source=label)
    return Modality(name, kind, preprocessor.transform(raw, source=label), source, preprocessor, raw, set_aside)


def unsplit_data(modality: Modality) -> pd.DataFrame:
    """The modality's data before its sign split: one column per feature, signs kept.

    Patient distances and per-feature tests need each feature once; the split (positive
    part, negative part) is only for the non-negative factorisation. It is undone as positive
    part minus negative part, exact in floating point, so nothing (imputation included) is
    computed twice. Without a split (or without a preprocessor) this is `data` itself.
    """
    fitted = modality.preprocessor
    if fitted is None or not fitted.steps_ or fitted.steps_[-1]["step"] != "split_signs":
        return modality.data
    half = modality.data.shape[1] // 2
    values = modality.data.to_numpy()
    features = pd.Index(fitted.output_sources_[:half], name=modality.data.columns.name)
    return pd.DataFrame(values[:, :half] - values[:, half:], index=modality.data.index, columns=features)


class Cohort:
    """The clinical table and the modalities, aligned on patient identifiers.

    Patients of the cohort are the clinical IDs that appear in at least one modality, in
    the clinical table's order. Identifiers are stripped of surrounding whitespace and
    matched exactly: a modality patient absent from the clinical table, or differing from
    a clinical ID only in case, is left out and listed in `unmatched` (never merged):
    columns modality, patient_id, reason (NOT_IN_CLINICAL or CASE_ONLY) and clinical_id
    (the clinical ID of a case-only twin, else empty).
    A modality sharing no patient, or fewer than `min_patients`, with the clinical table
    is an InputError.
    """

    def __init__(self, clinical: pd.DataFrame, modalities: list[Modality], min_patients: int = DEFAULT_MIN_PATIENTS):
        clinical_ids = check_identifiers(
            clinical.index, TablePositions("clinical table", clinical.index, clinical.columns), "row"
        )
        self.clinical = clinical.set_axis(pd.Index(clinical_ids, name=clinical.index.name), axis=0)
        _check_unique_names(modalities)
        folded = pd.Series(clinical_ids, index=clinical_ids.str.casefold())
        kept, unmatched = [], []
        for modality in modalities:
            shared_modality, missing = _restrict(modality, clinical_ids, folded, min_patients)
            kept.append(shared_modality)
            unmatched.append(missing)
        self.modalities = kept
        self.unmatched = pd.concat(unmatched, ignore_index=True) if unmatched else _unmatched_frame([], [], [], [])
        measured = pd.Index([]).append([m.data.index for m in kept]) if kept else pd.Index([])
        self._patients = clinical_ids[clinical_ids.isin(measured)]

    @property
    def patients(self) -> pd.Index:
        """Clinical IDs measured on at least one modality, in clinical order."""
        return pd.Index(self._patients, name="patient_id")

    @property
    def names(self) -> list[str]:
        return [m.name for m in self.modalities]

    def modality(self, name: str) -> Modality:
        """The modality called `name`."""
        for modality in self.modalities:
            if modality.name == name:
                return modality
        raise input_error("cohort", f"modality {shown(name)}", "no such modality", "one of " + ", ".join(self.names))

    @property
    def presence(self) -> pd.DataFrame:
        """Booleans, patients x modalities: is the patient measured on the modality."""
        columns = {m.name: self.patients.isin(m.data.index) for m in self.modalities}
        return pd.DataFrame(columns, index=self.patients, dtype=bool)

    def aligned_views(self, patients: pd.Index | None = None) -> list[pd.DataFrame]:
        """Each modality's data on one patient index (default: the cohort's), all-NaN rows where missing.

        These are the joint NMF's inputs (non-negative when the preprocessing made them so).
        """
        index = self.patients if patients is None else pd.Index(patients)
        return [m.data.reindex(index) for m in self.modalities]

    def normalised_views(self) -> dict[str, pd.DataFrame]:
        """Each modality on its own patients and normalised scale, one column per feature (before
        any sign split): what patient graphs and marker tests take."""
        return {m.name: unsplit_data(m) for m in self.modalities}


def _check_unique_names(modalities: list[Modality]) -> None:
    names = pd.Index([m.name for m in modalities])
    if names.duplicated().any():
        repeated = names[names.duplicated()][0]
        raise input_error("cohort", f"modality {shown(repeated)}", "the name twice", "one modality per name")


def _restrict(modality: Modality, clinical_ids: pd.Index, folded: pd.Series, min_patients: int):
    """The modality on its patients shared with the clinical table, and a table of the others."""
    data = modality.data
    ids = check_identifiers(data.index, TablePositions(modality.label, data.index, data.columns), "row")
    shared = ids.isin(clinical_ids)
    if not shared.any():
        raise input_error(modality.label, "patients", f"none of {ids.size} patient IDs in the clinical table",
                          "patient IDs shared with the clinical table")
    check_patient_count(int(shared.sum()), min_patients, modality.label)
    others = ids[~shared]
    twins = folded.reindex(others.str.casefold())
    reasons = pd.Series(CASE_ONLY, index=twins.index).where(twins.notna(), NOT_IN_CLINICAL)
    restricted = data.set_axis(pd.Index(ids, name="patient_id"), axis=0).loc[shared]
    raw = modality.raw
    if raw is not None:
        raw = raw.set_axis(pd.Index(raw.index.astype(str).str.strip(), name="patient_id"), axis=0)
        raw = raw.loc[raw.index.isin(restricted.index)]
    failed = modality.set_aside[modality.set_aside.isin(clinical_ids)]
    return replace(modality, data=restricted, raw=raw), _unmatched_frame(
        [modality.name] * (others.size + failed.size), others.append(failed),
        list(reasons) + [FAILED_LIBRARY] * failed.size, list(twins.fillna("")) + [""] * failed.size,
    )


def _unmatched_frame(names, ids, reasons, twins) -> pd.DataFrame:
    return pd.DataFrame(
        {"modality": list(names), "patient_id": list(ids), "reason": list(reasons), "clinical_id": list(twins)},
        dtype=object,
    )

