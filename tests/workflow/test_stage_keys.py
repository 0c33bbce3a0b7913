"""What each stage's cache key covers: a changed setting reruns its stage and those after it only."""

from __future__ import annotations

import dataclasses
from pathlib import Path

from strataweave.workflow.cache import Pipeline, StageCache
from strataweave.workflow.config import load_workflow
from strataweave.workflow.run_folder import input_hashes
from strataweave.workflow.progress import QUIET, Feedback
from strataweave.seeding import run_seeds
from strataweave.workflow.stages import build_stages


def _keys(flow) -> dict[str, str]:
    stages = build_stages(flow, input_hashes(flow), run_seeds(flow.seed), Feedback(QUIET))
    return Pipeline(stages, StageCache("unused"), listener=None).keys


def _changed(keys: dict, other: dict) -> list[str]:
    return [name for name in keys if keys[name] != other[name]]


def test_where_the_resamples_run_changes_no_key(tiny_files: Path) -> None:
    flow = load_workflow(tiny_files / "flow.toml")
    elsewhere = dataclasses.replace(flow, resampling=dataclasses.replace(flow.resampling, backend="processes", n_jobs=2))
    assert _keys(flow) == _keys(elsewhere)


def test_each_setting_reruns_its_stage_and_what_follows(tiny_files: Path) -> None:
    flow = load_workflow(tiny_files / "flow.toml")
    base = _keys(flow)
    graph = dataclasses.replace(flow, graph=dataclasses.replace(flow.graph, n_neighbours=3))
    assert _changed(base, _keys(graph)) == ["graphs", "sweep", "select", "final_fit", "evaluate"]
    count = dataclasses.replace(flow, subtypes=dataclasses.replace(flow.subtypes, use_count=3))
    assert _changed(base, _keys(count)) == ["select", "final_fit", "evaluate"]
    evaluation = dataclasses.replace(flow, evaluation=dataclasses.replace(flow.evaluation, n_permutations=5))
    assert _changed(base, _keys(evaluation)) == ["evaluate"]
    # the default search (auto) may be approximate, which the seed steers; an exact graph ignores the seed
    assert _changed(base, _keys(flow.with_overrides(seed=99))) == ["graphs", "sweep", "select", "final_fit", "evaluate"]
    exact = dataclasses.replace(flow, graph=dataclasses.replace(flow.graph, neighbour_search="exact"))
    assert _changed(_keys(exact), _keys(exact.with_overrides(seed=99))) == ["sweep", "select", "final_fit", "evaluate"]


def test_an_edited_input_file_reruns_everything(tiny_files: Path) -> None:
    flow = load_workflow(tiny_files / "flow.toml")
    base = _keys(flow)
    with open(tiny_files / "rna.tsv", "a") as handle:
        handle.write("G9\t" + "\t".join("1" for _ in range(6)) + "\n")
    assert _changed(base, _keys(flow)) == list(base)
