"""evaluate layer (see DESIGN.md): survival, clinical association, markers and gene-set enrichment
for any grouping (a pandas Series of labels indexed by patient ID).

Every public evaluation returns an `Evaluation`: tidy DataFrames in `tables` and a
JSON-serialisable dict in `summary` (NaN and infinity as None).
"""

from strataweave.evaluate.clinical import associate_clinical
from strataweave.evaluate.enrichment import enrich_markers
from strataweave.evaluate.gene_sets import read_gene_set_lines, read_gene_set_table
from strataweave.evaluate.logrank import logrank_permutation_p, logrank_test
from strataweave.evaluate.markers import find_markers, markers_by_modality
from strataweave.evaluate.multiple_testing import bh_adjust
from strataweave.evaluate.result import Evaluation, plain
from strataweave.evaluate.survival import evaluate_survival

__all__ = [
    "Evaluation",
    "associate_clinical",
    "bh_adjust",
    "enrich_markers",
    "evaluate_survival",
    "find_markers",
    "logrank_permutation_p",
    "logrank_test",
    "markers_by_modality",
    "plain",
    "read_gene_set_lines",
    "read_gene_set_table",
]
