"""strataweave: multi-omics patient stratification workbench (research use only)."""

from strataweave.caution import CAUTION
from strataweave.errors import InputError

__version__ = "0.1.0"

__all__ = ["CAUTION", "InputError", "__version__"]
