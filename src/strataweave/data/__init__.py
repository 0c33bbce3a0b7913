"""data layer: read, validate, align, normalise and filter each omics layer (see DESIGN.md)."""

from strataweave.data.cohort import Cohort, Modality, prepare_modality
from strataweave.data.preprocess import Preprocessor
from strataweave.data.qc import presence_patterns, qc_summary
from strataweave.data.readers import ORIENTATIONS, read_clinical, read_matrix
from strataweave.data.synthetic import make_synthetic_cohort, write_synthetic_cohort
from strataweave.data.validation import KINDS

__all__ = [
    "KINDS",
    "ORIENTATIONS",
    "Cohort",
    "Modality",
    "Preprocessor",
    "make_synthetic_cohort",
    "prepare_modality",
    "presence_patterns",
    "qc_summary",
    "read_clinical",
    "read_matrix",
    "write_synthetic_cohort",
]
