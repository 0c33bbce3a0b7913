"""On the invented cohort, the evaluation finds what was planted: enriched gene sets and outcome."""

import numpy as np
import pandas as pd
import pytest

from strataweave.data.synthetic import make_synthetic_cohort
from strataweave.evaluate import enrich_markers, evaluate_survival, find_markers


@pytest.fixture(scope="module")
def cohort():
    return make_synthetic_cohort(n_patients=200, seed=5)


def _log_cpm(counts: pd.DataFrame) -> pd.DataFrame:
    """log2 counts per million + 1, enough normalisation for a rank-based marker test."""
    return np.log2(counts.div(counts.sum(axis=1), axis=0) * 1e6 + 1)


def test_planted_gene_sets_come_out_on_top_for_their_subtypes(cohort):
    markers = find_markers(cohort.planted, _log_cpm(cohort.patients_by_features("rna")), modality="rna")
    sets = {name: members for name, (_, members) in cohort.gene_sets.items()}
    result = enrich_markers(markers.tables["markers"], sets)
    over = result.tables["over_representation"]
    ranked = result.tables["rank_test"]
    assert cohort.enriched_sets  # the cohort plants at least one enriched set
    for name, subtypes in cohort.enriched_sets.items():
        for subtype in subtypes:
            first = over[over["group"] == subtype].iloc[0]
            assert first["set"] == name and first["p_adjusted"] < 0.05
            up = ranked[(ranked["group"] == subtype) & (ranked["auc"] > 0.5)].iloc[0]
            assert up["set"] == name and up["p_adjusted"] < 0.05
    random_sets = over[~over["set"].isin(list(cohort.enriched_sets))]
    assert (random_sets["p_adjusted"] > 0.05).mean() > 0.9  # unplanted sets mostly stay quiet


def test_planted_subtypes_differ_in_survival(cohort):
    summary = evaluate_survival(
        cohort.planted, cohort.clinical, "os_months", "os_event", n_permutations=500, random_state=1
    ).summary
    assert summary["logrank"]["p_value"] < 1e-3
    assert summary["logrank"]["p_value_permutation"] == pytest.approx(1 / 501)
