"""The graphs stage: one patient graph per modality, fused by the workflow's rule, with diagnostics."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from strataweave.graph import fuse_modalities, graph_diagnostics, modality_agreement, spectral_embedding
from strataweave.workflow.config import Workflow
from strataweave.workflow.preparing import normalised_views
from strataweave.workflow.progress import Feedback


#: The columns of the fusion-rule evidence written to results.json (per-modality shares stay in the graph).
EVIDENCE_COLUMNS = ("rule", "quorum", "confirmed_share", "fallback_patients", "chosen")


def build_graph(flow: Workflow, prepared: dict, seed: int, feedback: Feedback) -> dict:
    """The fused affinity on the analysis patients (their order), its diagnostics and a 2-D embedding."""
    settings = flow.graph
    views = normalised_views(prepared)
    with feedback.bar("patient graphs", 2 * len(views)) as progress:
        graph = fuse_modalities(
            views,
            rule=settings.fusion,
            quorum=settings.quorum,
            n_neighbours=settings.neighbours,
            metric=settings.metric,
            kernel=settings.kernel,
            neighbour_search=settings.neighbour_search,
            random_state=seed,
            progress=progress,
        )
    graph = graph.restrict(prepared["patients"])
    affinity = sp.csr_matrix(graph.affinity)
    agreement = modality_agreement(graph)
    names = list(agreement.index)
    n_components, _ = connected_components(affinity, directed=False)
    return {
        "affinity": affinity,
        "embedding": spectral_embedding(affinity, n_dims=2),
        "summary": {
            "rule": graph.rule,
            "quorum": graph.parameters["quorum"],
            "rule_requested": graph.parameters["rule_requested"],
            "rule_evidence": graph.rule_evidence[list(EVIDENCE_COLUMNS)].to_dict(orient="records"),
            "neighbours": settings.neighbours,
            "neighbour_search": graph.parameters["neighbour_search"],
            "neighbour_search_requested": settings.neighbour_search,
            "approximate_above": graph.parameters["approximate_above"],
            "isolated_patients": int(len(graph.isolated_patients)),
            "fallback_patients": int(len(graph.fallback_patients)),
            "components": int(n_components),
            "agreement": [
                {"modality_a": a, "modality_b": b, "overlap": _number(agreement.loc[a, b])}
                for i, a in enumerate(names)
                for b in names[i + 1:]
            ],
        },
        "diagnostics": graph_diagnostics(graph).reset_index(),
    }


def _number(value: float) -> float | None:
    return float(value) if np.isfinite(value) else None
