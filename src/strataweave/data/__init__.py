"""data layer: read, validate, align, normalise and filter each omics layer (see DESIGN.md)."""

from strataweave.data.preprocess import Preprocessor
from strataweave.data.readers import ORIENTATIONS, read_clinical, read_matrix
from strataweave.data.validation import KINDS

__all__ = ["KINDS", "ORIENTATIONS", "Preprocessor", "read_clinical", "read_matrix"]
