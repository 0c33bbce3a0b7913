"""graph layer (see DESIGN.md): sparse patient-similarity graphs per modality and their fusion."""

from strataweave.graph.diagnostics import graph_diagnostics, modality_agreement, modularity, neighbour_purity
from strataweave.graph.fusion import fuse_modalities
from strataweave.graph.patient_graph import PatientGraph
from strataweave.graph.spectral import eigen_solver, eigengaps, spectral_embedding

__all__ = [
    "PatientGraph",
    "eigen_solver",
    "eigengaps",
    "fuse_modalities",
    "graph_diagnostics",
    "modality_agreement",
    "modularity",
    "neighbour_purity",
    "spectral_embedding",
]
