"""Read a TOML workflow file into a validated, immutable `Workflow`.

Strict on purpose: an unknown key is an error (a typo must not pass silently), every
error is one `InputError` line naming the file and the key, relative paths resolve
against the workflow file's folder, and everything not given takes its default.
"""

from __future__ import annotations

import dataclasses
import tomllib
from dataclasses import dataclass, fields
from pathlib import Path

from strataweave.errors import InputError
from strataweave.workflow import rules
from strataweave.workflow.settings import (
    SECTIONS,
    CohortSettings,
    EvaluationSettings,
    FactorizationSettings,
    GraphSettings,
    ModalitySettings,
    ReportSettings,
    ResamplingSettings,
    SubtypeSettings,
)

TOP_LEVEL_RULES = {"seed": rules.integer(0, 2**32 - 1)}


@dataclass(frozen=True)
class Workflow:
    """Everything a run needs to know, validated; `text` is the file as written."""

    source: Path
    text: str
    seed: int
    cohort: CohortSettings
    modalities: tuple[ModalitySettings, ...]
    graph: GraphSettings
    factorization: FactorizationSettings
    subtypes: SubtypeSettings
    resampling: ResamplingSettings
    evaluation: EvaluationSettings
    report: ReportSettings

    @property
    def has_survival(self) -> bool:
        return self.cohort.time_column is not None

    def input_files(self) -> dict[str, Path]:
        """Every input file by a stable label (clinical, modality:<name>, gene_sets)."""
        files = {"clinical": self.cohort.clinical}
        files.update({f"modality:{m.name}": m.path for m in self.modalities})
        if self.evaluation.gene_sets is not None:
            files["gene_sets"] = self.evaluation.gene_sets
        return files

    def with_overrides(self, seed: int | None = None, jobs: int | None = None) -> "Workflow":
        """A copy with the command line's --seed / --jobs applied."""
        changed = self
        if seed is not None:
            if not 0 <= seed < 2**32:
                raise InputError(f"--seed: found {seed}, expected an integer from 0 to 2**32 - 1")
            changed = dataclasses.replace(changed, seed=seed)
        if jobs is not None:
            if jobs < 1:
                raise InputError(f"--jobs: found {jobs}, expected an integer >= 1")
            changed = dataclasses.replace(changed, resampling=dataclasses.replace(changed.resampling, jobs=jobs))
        return changed


def _found(value: object) -> str:
    shown = repr(value)
    return shown if len(shown) <= 60 else shown[:57] + "..."


def _parse_section(table: object, cls: type, where: str, source: str, base_dir: Path) -> object:
    """Build section `cls` from a TOML table, naming `where` (e.g. 'graph') in every error."""
    if not isinstance(table, dict):
        raise InputError(f"{source}: key '{where}': found {_found(table)}, expected a table [{where}]")
    known = {f.name: f for f in fields(cls)}
    for name in table:
        if name not in known:
            raise InputError(
                f"{source}: unknown key '{where}.{name}', expected one of: {', '.join(known)}"
            )
    values = {}
    for name, spec in known.items():
        if name not in table:
            if spec.default is dataclasses.MISSING:
                raise InputError(f"{source}: missing key '{where}.{name}' (required)")
            continue
        try:
            values[name] = spec.metadata["rule"](table[name], base_dir)
        except rules.RuleBroken as broken:
            raise InputError(
                f"{source}: key '{where}.{name}': found {_found(table[name])}, expected {broken}"
            ) from None
    return cls(**values)


def _parse_modalities(raw: object, source: str, base_dir: Path) -> tuple[ModalitySettings, ...]:
    if not isinstance(raw, list) or not all(isinstance(item, dict) for item in raw):
        raise InputError(f"{source}: key 'modality': found {_found(raw)}, expected [[modality]] tables")
    modalities = []
    for number, table in enumerate(raw, start=1):
        name = table.get("name")
        label = f"modality[{name}]" if isinstance(name, str) and name.strip() else f"modality[{number}]"
        modalities.append(_parse_section(table, ModalitySettings, label, source, base_dir))
    names = [m.name for m in modalities]
    for number, name in enumerate(names, start=1):
        if names.index(name) != number - 1:
            raise InputError(f"{source}: key 'modality[{number}].name': found {name!r} again, expected unique names")
    return tuple(modalities)


def _check_combinations(flow: Workflow, source: str) -> None:
    """Rules that involve more than one key."""
    cohort, graph, subtypes = flow.cohort, flow.graph, flow.subtypes
    if (cohort.time_column is None) != (cohort.event_column is None):
        given, missing = ("time_column", "event_column") if cohort.event_column is None else ("event_column", "time_column")
        raise InputError(f"{source}: key 'cohort.{missing}': missing, expected it together with 'cohort.{given}'")
    if graph.fusion == "quorum" and graph.quorum is None:
        raise InputError(f"{source}: key 'graph.quorum': missing, expected an integer when graph.fusion = 'quorum'")
    if graph.quorum is not None and graph.fusion != "quorum":
        raise InputError(f"{source}: key 'graph.quorum': found {graph.quorum}, expected it only with graph.fusion = 'quorum'")
    if graph.quorum is not None and flow.modalities and graph.quorum > len(flow.modalities):
        raise InputError(
            f"{source}: key 'graph.quorum': found {graph.quorum}, expected at most the {len(flow.modalities)} modalities"
        )
    if isinstance(subtypes.use_count, int) and subtypes.use_count not in subtypes.counts:
        raise InputError(
            f"{source}: key 'subtypes.use_count': found {subtypes.use_count}, expected one of subtypes.counts {list(subtypes.counts)}"
        )
    window = subtypes.pac_window
    if len(window) != 2 or window[0] >= window[1]:
        raise InputError(f"{source}: key 'subtypes.pac_window': found {list(window)}, expected two numbers, lower first")
    if flow.resampling.scheduler is not None and flow.resampling.backend != "dask":
        raise InputError(f"{source}: key 'resampling.scheduler': given, expected it only with resampling.backend = 'dask'")
    names = [m.name for m in flow.modalities]
    if flow.evaluation.gene_set_modality is not None and flow.evaluation.gene_set_modality not in names:
        raise InputError(
            f"{source}: key 'evaluation.gene_set_modality': found {flow.evaluation.gene_set_modality!r}, "
            f"expected one of the modalities {names}"
        )
    if flow.evaluation.max_set_size < flow.evaluation.min_set_size:
        raise InputError(
            f"{source}: key 'evaluation.max_set_size': found {flow.evaluation.max_set_size}, "
            f"expected at least evaluation.min_set_size ({flow.evaluation.min_set_size})"
        )


def parse_workflow(text: str, source: Path, require_modalities: bool = True) -> Workflow:
    """Validate workflow `text` as if read from `source` (paths resolve against its folder)."""
    label = source.name
    base_dir = source.parent
    try:
        document = tomllib.loads(text)
    except tomllib.TOMLDecodeError as problem:
        raise InputError(f"{label}: not valid TOML: {problem}") from None
    allowed = ["seed", "cohort", "modality", *[name for name in SECTIONS if name != "cohort"]]
    for name in document:
        if name not in allowed:
            raise InputError(f"{label}: unknown key '{name}', expected one of: {', '.join(allowed)}")
    if "cohort" not in document:
        raise InputError(f"{label}: missing key 'cohort' (required table [cohort])")
    seed = 0
    if "seed" in document:
        try:
            seed = TOP_LEVEL_RULES["seed"](document["seed"], base_dir)
        except rules.RuleBroken as broken:
            raise InputError(f"{label}: key 'seed': found {_found(document['seed'])}, expected {broken}") from None
    modalities = _parse_modalities(document.get("modality", []), label, base_dir)
    if require_modalities and not modalities:
        raise InputError(f"{label}: missing key 'modality' (expected at least one [[modality]] table)")
    sections = {
        name: _parse_section(document.get(name, {}), cls, name, label, base_dir) for name, cls in SECTIONS.items()
    }
    flow = Workflow(source=source, text=text, seed=seed, modalities=modalities, **sections)
    _check_combinations(flow, label)
    return flow


def load_workflow(path: str | Path, require_modalities: bool = True) -> Workflow:
    """Read and validate the workflow file at `path`."""
    path = Path(path).expanduser().resolve()
    if not path.is_file():
        raise InputError(f"{path}: workflow file not found")
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as problem:
        raise InputError(f"{path.name}: not UTF-8 text (byte {problem.start})") from None
    return parse_workflow(text, path, require_modalities=require_modalities)
