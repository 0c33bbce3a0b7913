"""strataweave: multi-omics patient stratification workbench (research use only).

The Python door: cohorts from tables, files or AnnData/MuData, graph fusion, the joint NMF,
the subtype sweep and the fitted subtype model, and evaluations of any grouping, all
importable from here (loaded on first use, so the command line starts quickly).
"""

from importlib import import_module

from strataweave.caution import CAUTION
from strataweave.errors import InputError

__version__ = "0.1.0"

#: public name -> module that defines it
_PUBLIC = {
    "Cohort": "strataweave.data.cohort",
    "Modality": "strataweave.data.cohort",
    "Preprocessor": "strataweave.data.preprocess",
    "cohort_from_tables": "strataweave.data.assembly",
    "read_cohort": "strataweave.data.assembly",
    "read_mudata": "strataweave.data.assembly",
    "read_clinical": "strataweave.data.readers",
    "read_matrix": "strataweave.data.readers",
    "write_annotated": "strataweave.data.annotated",
    "GraphFusion": "strataweave.api.graph",
    "PatientGraph": "strataweave.graph.patient_graph",
    "JointNMF": "strataweave.factorize.joint_nmf",
    "SubtypeSweep": "strataweave.api.sweep",
    "SubtypeModel": "strataweave.subtypes.model",
    "SurvivalComparison": "strataweave.api.evaluation",
    "ClinicalAssociation": "strataweave.api.evaluation",
    "MarkerSearch": "strataweave.api.evaluation",
    "GeneSetEnrichment": "strataweave.api.evaluation",
    "PartitionAgreement": "strataweave.api.evaluation",
    "read_gene_set_lines": "strataweave.evaluate.gene_sets",
    "read_gene_set_table": "strataweave.evaluate.gene_sets",
    "run_seeds": "strataweave.seeding",
}

__all__ = ["CAUTION", "InputError", "__version__", *_PUBLIC]


def __getattr__(name: str):
    if name not in _PUBLIC:
        raise AttributeError(f"module 'strataweave' has no attribute {name!r}")
    value = getattr(import_module(_PUBLIC[name]), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
