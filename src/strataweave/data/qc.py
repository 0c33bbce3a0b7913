"""Quality-control tables of a Cohort: per-modality counts and the presence patterns."""

from __future__ import annotations

import numpy as np
import pandas as pd

from strataweave.data.cohort import Cohort, Modality

FILTER_STEPS = ("missing_filter", "variance_filter", "top_features")


def qc_summary(cohort: Cohort) -> pd.DataFrame:
    """One row per modality: patients, features before and after each filter, missing fraction.

    `features_input` counts the features given to the preprocessor; `after_<filter>` is
    the count after that filter (equal to the count before it when the filter was not
    asked for); `features_used` the columns the model sees (twice the features after a
    sign split). `missing_fraction` is over the raw cells of the cohort's patients when
    the raw table is kept, otherwise over the prepared data. `patients_unmatched` counts
    modality patients left out because the clinical table lacks them (see `cohort.unmatched`).
    """
    unmatched = cohort.unmatched["modality"].value_counts()
    rows = [_row(m, int(unmatched.get(m.name, 0))) for m in cohort.modalities]
    return pd.DataFrame(rows).set_index("modality")


def _row(modality: Modality, unmatched: int) -> dict:
    row = {
        "modality": modality.name,
        "kind": modality.kind,
        "source": modality.source,
        "patients": int(modality.data.shape[0]),
        "patients_unmatched": unmatched,
    }
    fitted = modality.preprocessor
    count = len(fitted.input_features_) if fitted is not None and fitted.steps_ else int(modality.data.shape[1])
    row["features_input"] = count
    done = dict(applied_filters(modality))
    for name in FILTER_STEPS:
        count = int(done.get(name, count))
        row[f"after_{name}"] = count
    row["features_used"] = int(modality.data.shape[1])
    cells = (modality.raw if modality.raw is not None else modality.data).to_numpy(dtype=np.float64)
    row["missing_fraction"] = float(np.isnan(cells).mean()) if cells.size else 0.0
    return row


def applied_filters(modality: Modality) -> list[tuple[str, int]]:
    """(filter step, features left after it) for each filter the modality's preprocessor ran, in order."""
    steps = modality.preprocessor.steps_ if modality.preprocessor is not None else []
    return [(step["step"], int(step["features_out"])) for step in steps if step["step"] in FILTER_STEPS]


def unmatched_counts(unmatched: pd.DataFrame) -> pd.DataFrame:
    """A `cohort.unmatched` table counted per modality and reason (columns modality, reason, patients).

    The counts carry no patient identifier, so they may go where identifiers may not.
    """
    counts = unmatched.groupby(["modality", "reason"], sort=False).size()
    return counts.rename("patients").reset_index()


def presence_patterns(cohort: Cohort) -> pd.DataFrame:
    """How many patients have each combination of modalities (one row per combination seen).

    Columns: one boolean per modality, `modalities` (how many are present), `patients`;
    the most complete combinations first.
    """
    presence = cohort.presence
    counts = presence.value_counts(sort=False).rename("patients").reset_index()
    counts.insert(len(presence.columns), "modalities", counts[list(presence.columns)].sum(axis=1))
    return counts.sort_values(["modalities", "patients"], ascending=False, kind="stable").reset_index(drop=True)
