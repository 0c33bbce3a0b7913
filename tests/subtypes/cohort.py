"""A small invented cohort ready for the sweep: non-negative modalities plus the fused graph."""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from strataweave.data import Preprocessor
from strataweave.data.synthetic import make_synthetic_cohort
from strataweave.graph import PatientGraph, fuse_modalities


@dataclass
class PreparedCohort:
    views: dict[str, pd.DataFrame]
    graph: PatientGraph
    planted: pd.Series


def prepared_cohort(n_patients: int, n_subtypes: int, seed: int, top_features: int) -> PreparedCohort:
    """z-scored modalities for the graph, their split non-negative form for the joint NMF."""
    cohort = make_synthetic_cohort(n_patients, n_subtypes, seed=seed)
    scaled, non_negative = {}, {}
    for name in cohort.tables:
        raw = cohort.patients_by_features(name)
        options = {"impute": "median", "top_features": top_features}
        scaled[name] = Preprocessor(cohort.kinds[name], **options).fit(raw).transform(raw)
        split = Preprocessor(cohort.kinds[name], non_negative="split", **options)
        non_negative[name] = split.fit(raw).transform(raw)
    graph = fuse_modalities(scaled, rule="average", n_neighbours=15)
    views = {name: frame.reindex(graph.patients) for name, frame in non_negative.items()}
    return PreparedCohort(views, graph, cohort.planted.reindex(graph.patients))
