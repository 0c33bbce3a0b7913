"""The stages of a run and what each one's cache key covers.

run:      load -> prepare -> graphs -> sweep -> select -> final_fit -> evaluate
evaluate: load -> prepare (only with modalities) -> evaluate (of the grouping given)

A stage's parameters hold exactly the settings its result depends on: where the resamples
run (backend, jobs, scheduler) is left out because the results do not depend on it, and
input files enter by their sha256, not their path.
"""

from __future__ import annotations

import dataclasses

import pandas as pd

from strataweave.workflow.config import Workflow
from strataweave.workflow.evaluating import EVALUATION_LAYOUT, evaluate_grouping
from strataweave.workflow.graphing import build_graph
from strataweave.workflow.grouping import analysis_patients, given_grouping
from strataweave.workflow.loading import load_inputs
from strataweave.workflow.pipeline import WORK, Stage
from strataweave.workflow.preparing import RESULT_LAYOUT, prepare_cohort
from strataweave.workflow.progress import Feedback
from strataweave.workflow.sweeping import (
    final_fit,
    final_labels,
    run_sweep,
    select_count,
    sweep_settings,
)


def _load_stage(flow: Workflow, hashes: dict[str, str]) -> Stage:
    parameters = {
        "clinical": hashes["clinical"],
        "id_column": flow.cohort.id_column,
        "modalities": [
            {"name": m.name, "kind": m.kind, "orientation": m.orientation, "sha256": hashes[f"modality:{m.name}"]}
            for m in flow.modalities
        ],
    }
    return Stage("load", (), parameters, lambda inputs: load_inputs(flow))


def _prepare_stage(flow: Workflow) -> Stage:
    parameters = {
        "layout": RESULT_LAYOUT,
        "modalities": [{"name": m.name, **m.preprocessing()} for m in flow.modalities],
    }
    return Stage("prepare", ("load",), parameters, lambda inputs: prepare_cohort(flow, inputs["load"]))


def _evaluation_parameters(flow: Workflow, hashes: dict[str, str], seed: int) -> dict:
    settings = dataclasses.asdict(flow.evaluation)
    settings["gene_sets"] = hashes.get("gene_sets")
    cohort = {"time_column": flow.cohort.time_column, "event_column": flow.cohort.event_column}
    return {"layout": EVALUATION_LAYOUT, "evaluation": settings, "cohort": cohort, "seed": seed,
            "groups": hashes.get("groups")}


def _graph_parameters(flow: Workflow, seed: int) -> dict:
    """The [graph] keys, and the seed where the search may be approximate (an exact graph ignores it)."""
    settings = dataclasses.asdict(flow.graph)
    return settings if flow.graph.neighbour_search == "exact" else {**settings, "seed": seed}


def build_stages(
    flow: Workflow, hashes: dict[str, str], seeds: dict[str, int], feedback: Feedback, groups: pd.Series | None = None
) -> list[Stage]:
    """The stages of `strataweave run`, or of `strataweave evaluate` when `groups` is given."""
    stages = [_load_stage(flow, hashes)]
    if flow.modalities:
        stages.append(_prepare_stage(flow))
    evaluation = _evaluation_parameters(flow, hashes, seeds["evaluate"])
    if groups is not None:
        needs = ("load", "prepare") if flow.modalities else ("load",)

        def evaluate_given(inputs: dict) -> dict:
            patients = analysis_patients(inputs["load"], inputs.get("prepare"))
            labels = given_grouping(groups, patients).labels
            return evaluate_grouping(flow, inputs["load"]["clinical"], inputs.get("prepare"), labels,
                                     seeds["evaluate"], feedback)

        stages.append(Stage("evaluate", needs, evaluation, evaluate_given))
        return stages
    sweep_parameters = {
        "counts": sorted(set(flow.subtypes.counts)),
        "settings": sweep_settings(flow).to_dict(),
        "factorization": {"settings": dataclasses.asdict(flow.factorization), "weights": [m.weight for m in flow.modalities]},
        "seed": seeds["sweep"],
    }
    stages += [
        Stage("graphs", ("prepare",), _graph_parameters(flow, seeds["graphs"]),
              lambda inputs: build_graph(flow, inputs["prepare"], seeds["graphs"], feedback)),
        Stage("sweep", ("prepare", "graphs"), sweep_parameters,
              lambda inputs: run_sweep(flow, inputs["prepare"], inputs["graphs"], seeds["sweep"], feedback,
                                       inputs[WORK]),
              keeps_work=True),
        Stage("select", ("sweep",), {"use_count": flow.subtypes.use_count},
              lambda inputs: select_count(flow, inputs["sweep"])),
        Stage("final_fit", ("prepare", "sweep", "select"), {},
              lambda inputs: final_fit(inputs["prepare"], inputs["sweep"], inputs["select"])),
        Stage(
            "evaluate",
            ("load", "prepare", "final_fit"),
            evaluation,
            lambda inputs: evaluate_grouping(
                flow, inputs["load"]["clinical"], inputs["prepare"], final_labels(inputs["final_fit"]),
                seeds["evaluate"], feedback,
            ),
        ),
    ]
    return stages
