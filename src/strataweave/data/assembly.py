"""Cohorts from pandas tables or from files, prepared the way a subtype analysis needs them.

A modality is given as `(table or path, kind)` or `(table or path, kind, {options})`;
options are `Preprocessor` keyword arguments (and, for files, `orientation`). Options given
for all modalities apply to each, a modality's own options win, and ANALYSIS_DEFAULTS fill
in the rest.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

import pandas as pd

from strataweave.data.cohort import Cohort, prepare_modality
from strataweave.data.positions import input_error, shown
from strataweave.data.readers import read_clinical, read_matrix

#: Preprocessing that a subtype analysis sets apart from Preprocessor's own defaults: the joint
#: NMF needs non-negative input (the sign split keeps the sign of scaled data without an offset),
#: and the 2000 most variable features of a modality keep the factorisation's cost bounded.
ANALYSIS_DEFAULTS = {"top_features": 2000, "non_negative": "split"}

#: A modality needs at least one patient of the clinical table; small cohorts stay allowed.
MIN_SHARED_PATIENTS = 1


def _spec(name: str, spec) -> tuple[object, str, dict]:
    """(table or path, kind, options) of one modality entry."""
    if not isinstance(spec, (tuple, list)) or len(spec) not in (2, 3) or (len(spec) == 3 and not isinstance(spec[2], Mapping)):
        raise input_error("modalities", f"modality {shown(name)}", f"{type(spec).__name__} {spec!r:.40}",
                          "(table or path, kind) or (table or path, kind, {options})")
    return spec[0], spec[1], dict(spec[2]) if len(spec) == 3 else {}


def cohort_from_tables(
    clinical: pd.DataFrame, modalities: Mapping[str, tuple], *, sources: Mapping[str, str] | None = None, **options
) -> Cohort:
    """A Cohort from the clinical table (indexed by patient ID) and raw patients x features tables.

    Each modality's preprocessing is fitted on the patients of the clinical table.
    `sources` names each modality's origin in messages (a file name).
    """
    prepared = []
    for name, spec in modalities.items():
        raw, kind, own = _spec(name, spec)
        settings = {**ANALYSIS_DEFAULTS, **options, **own}
        source = (sources or {}).get(name, "")
        prepared.append(prepare_modality(name, kind, raw, source=source, patients=clinical.index, **settings))
    return Cohort(clinical, prepared, min_patients=MIN_SHARED_PATIENTS)


def read_cohort(clinical, modalities: Mapping[str, tuple], *, id_column: str = "patient_id", **options) -> Cohort:
    """A Cohort from files: a clinical table (.tsv/.csv, or the `obs` of an .h5mu/.h5ad) and one
    matrix file per modality (.tsv/.csv with its orientation detected from the clinical IDs unless
    given; an .h5ad; or an .h5mu, whose modality of the same name is read)."""
    table = read_clinical(clinical, id_column)
    raw, sources = {}, {}
    for name, spec in modalities.items():
        path, kind, own = _spec(name, spec)
        orientation = own.pop("orientation", None)
        raw[name] = (read_matrix(path, orientation, known_ids=table.index, name=name, kind=kind), kind, own)
        sources[name] = Path(path).name
    return cohort_from_tables(table, raw, sources=sources, **options)


def read_mudata(path, kinds: Mapping[str, str], **options) -> Cohort:
    """A Cohort from one .h5mu: `obs` as the clinical table, each modality named in `kinds` (name -> kind)."""
    return read_cohort(path, {name: (path, kind) for name, kind in kinds.items()}, **options)
