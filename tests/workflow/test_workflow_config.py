"""Workflow files: defaults, path resolution against the file's folder, strict keys."""

from __future__ import annotations

import dataclasses
import inspect
from pathlib import Path

import pytest

import strataweave as sw
from strataweave import InputError
from strataweave.workflow.config import RENAMED_KEYS, SECTIONS, ModalitySettings, load_workflow, parse_workflow

from workflow_files import MINIMAL


def test_minimal_file_takes_every_default(tiny_files: Path) -> None:
    flow = load_workflow(tiny_files / "flow.toml")
    assert flow.seed == 0
    assert flow.cohort.id_column == "patient_id"
    assert flow.cohort.time_column is None and not flow.has_survival
    assert flow.subtypes.counts == (2, 3, 4, 5, 6)
    assert flow.modalities[0].orientation is None  # omitted = detect
    for name, cls in SECTIONS.items():
        section = getattr(flow, name)
        for spec in dataclasses.fields(cls):
            if spec.default is not dataclasses.MISSING:
                assert getattr(section, spec.name) == spec.default, f"{name}.{spec.name}"


def test_relative_paths_resolve_against_the_workflow_folder(tiny_files: Path, monkeypatch) -> None:
    elsewhere = tiny_files / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    flow = load_workflow(tiny_files / "flow.toml")
    assert flow.cohort.clinical == (tiny_files / "clinical.tsv").resolve()
    assert flow.modalities[0].path == (tiny_files / "rna.tsv").resolve()
    assert set(flow.input_files()) == {"clinical", "modality:rna"}


def test_single_count_and_overrides(tiny_files: Path) -> None:
    text = MINIMAL + "\n[subtypes]\ncounts = 3\n"
    flow = parse_workflow(text, tiny_files / "flow.toml")
    assert flow.subtypes.counts == (3,)
    changed = flow.with_overrides(seed=11, jobs=2)
    assert (changed.seed, changed.resampling.n_jobs) == (11, 2)
    assert (flow.seed, flow.resampling.n_jobs) == (0, 0)  # the original is untouched (0: every core)


def test_evaluate_workflow_may_have_no_modalities(tiny_files: Path) -> None:
    text = '[cohort]\nclinical = "clinical.tsv"\ntime_column = "os_months"\nevent_column = "os_event"\n'
    flow = parse_workflow(text, tiny_files / "flow.toml", require_modalities=False)
    assert flow.modalities == () and flow.has_survival
    with pytest.raises(InputError, match="'modality'"):
        parse_workflow(text, tiny_files / "flow.toml")


def test_modality_keys_are_all_optional_except_name_path_kind() -> None:
    required = [f.name for f in dataclasses.fields(ModalitySettings) if f.default is dataclasses.MISSING]
    assert required == ["name", "path", "kind"]


@pytest.mark.parametrize(
    "addition, key",
    [
        ("\n[graph]\nneighbors = 5\n", "graph.neighbors"),
        ("\n[graph]\nn_neighbours = 1\n", "graph.n_neighbours"),
        ("\n[graph]\nneighbour_search = \"fast\"\n", "graph.neighbour_search"),
        ("\n[subtypes]\ncounts = [1, 2]\n", "subtypes.counts"),
        ("\n[subtypes]\ncounts = [2, 3]\nuse_count = 5\n", "subtypes.use_count"),
        ("\n[resampling]\nfraction = 1.5\n", "resampling.fraction"),
        ("\n[report]\nshow_patient_ids = \"yes\"\n", "report.show_patient_ids"),
    ],
)
def test_errors_name_the_key(tiny_files: Path, addition: str, key: str) -> None:
    with pytest.raises(InputError) as caught:
        parse_workflow(MINIMAL + addition, tiny_files / "flow.toml")
    message = str(caught.value)
    assert f"'{key}'" in message and "flow.toml" in message and "\n" not in message


def test_neighbour_search_is_read_with_auto_by_default(tiny_files: Path) -> None:
    assert parse_workflow(MINIMAL, tiny_files / "flow.toml").graph.neighbour_search == "auto"
    text = MINIMAL + '\n[graph]\nneighbour_search = "approximate"\n'
    assert parse_workflow(text, tiny_files / "flow.toml").graph.neighbour_search == "approximate"
    with pytest.raises(InputError, match=r"'graph\.neighbour_search': found 'fast', expected one of .*auto.*exact.*approximate"):
        parse_workflow(MINIMAL + '\n[graph]\nneighbour_search = "fast"\n', tiny_files / "flow.toml")


def test_a_renamed_key_is_unknown_and_its_error_names_the_new_key(tiny_files: Path) -> None:
    with pytest.raises(InputError) as caught:
        parse_workflow(MINIMAL + "\n[graph]\nneighbours = 10\n", tiny_files / "flow.toml")
    message = str(caught.value)
    assert "unknown key 'graph.neighbours' (it is now 'graph.n_neighbours'), expected one of: " in message
    assert "\n" not in message
    for section, renamed in RENAMED_KEYS.items():
        keys = {spec.name for spec in dataclasses.fields(SECTIONS[section])}
        assert set(renamed.values()) <= keys and not set(renamed) & keys, section


#: the Python door's estimators (and readers) that each section's keys feed, under the same names
FEEDS = {
    "cohort": [sw.read_clinical, sw.SurvivalComparison],
    "modality": [sw.Preprocessor, sw.read_matrix],
    "graph": [sw.GraphFusion],
    "factorization": [sw.SubtypeSweep],
    "subtypes": [sw.SubtypeSweep],
    "resampling": [sw.SubtypeSweep],
    "evaluation": [sw.SurvivalComparison, sw.ClinicalAssociation, sw.MarkerSearch, sw.GeneSetEnrichment],
}
#: keys that are no estimator's parameter: files and choices of the workflow itself, and the
#: per-modality weight (one entry of SubtypeSweep's modality_weights)
WORKFLOW_ONLY = {"cohort.clinical", "cohort.time_unit", "modality.weight", "subtypes.use_count",
                 "evaluation.gene_sets", "evaluation.gene_set_format", "evaluation.gene_set_modality"}


def test_every_key_is_named_as_the_python_parameter_it_feeds() -> None:
    for section, cls in [*SECTIONS.items(), ("modality", ModalitySettings)]:
        if section == "report":
            continue
        parameters = {name for fed in FEEDS[section] for name in inspect.signature(fed).parameters}
        for spec in dataclasses.fields(cls):
            key = f"{section}.{spec.name}"
            assert (spec.name in parameters) != (key in WORKFLOW_ONLY), key


def test_error_in_a_modality_names_it(tiny_files: Path) -> None:
    text = MINIMAL.replace('kind = "log_expression"', 'kind = "count"')
    with pytest.raises(InputError, match=r"'modality\[rna\]\.kind'.*'counts'"):
        parse_workflow(text, tiny_files / "flow.toml")


REPOSITORY = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize("name", ["synthetic_cohort.toml", "minimal.toml"])
def test_bundled_workflows_are_valid(name: str) -> None:
    if not (REPOSITORY / "synthetic_cohort" / "clinical.tsv").is_file():
        pytest.skip("the bundled synthetic cohort files are not in this checkout")
    flow = load_workflow(REPOSITORY / "workflows" / name)
    assert flow.modalities and flow.cohort.clinical.is_file()


def test_annotated_workflow_shows_every_key() -> None:
    text = (REPOSITORY / "workflows" / "synthetic_cohort.toml").read_text()
    for section, cls in [*SECTIONS.items(), ("modality", ModalitySettings)]:
        assert f"[{section}]" in text
        for spec in dataclasses.fields(cls):
            assert f"\n{spec.name} = " in text or f"\n# {spec.name} = " in text, f"{section}.{spec.name}"


def test_workflow_defaults_are_the_numeric_layers_defaults() -> None:
    import inspect

    from strataweave.evaluate import associate_clinical, evaluate_survival
    from strataweave.workflow.config import EvaluationSettings

    pairs = [  # the estimators' keys read their parameter tables (test_parameter_tables)
        (EvaluationSettings, evaluate_survival, "n_permutations"),
        (EvaluationSettings, associate_clinical, "n_monte_carlo"),
    ]
    for section, function, key in pairs:
        workflow_default = {f.name: f.default for f in dataclasses.fields(section)}[key]
        assert workflow_default == inspect.signature(function).parameters[key].default, key


def test_an_integer_bound_is_written_in_full(tiny_files: Path) -> None:
    with pytest.raises(InputError, match=r"key 'seed': found -1, expected an integer >= 0 and <= 4294967295$"):
        parse_workflow("seed = -1\n" + MINIMAL, tiny_files / "flow.toml")
