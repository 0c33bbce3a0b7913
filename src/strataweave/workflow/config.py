"""The workflow file: read a TOML workflow into a validated, immutable `Workflow`.

Strict on purpose: an unknown key is an error (a typo must not pass silently), every
error is one `InputError` line naming the file and the key, relative paths resolve
against the workflow file's folder, and everything not given takes its default.

Sections, in the order they build on each other:
- the sections of the file: one frozen dataclass per section, one field per key (the field
  name is the TOML key, its rule (see `strataweave.parameters`) sits in `metadata["rule"]`, a
  field without a default is required), so a key exists in exactly one place; a key that is
  an estimator's parameter takes its rule, default and help from that estimator's parameter
  table (`key_from`);
- the `Workflow` and the parser that reads the sections' definitions;
- the reference of every key (`workflow_reference`, written to workflows/REFERENCE.md by
  `python -m strataweave.workflow.config`), read from the same definitions.
"""

from __future__ import annotations

import dataclasses
import inspect
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field, fields
from pathlib import Path

from strataweave.data import Preprocessor
from strataweave.data.assembly import ANALYSIS_DEFAULTS
from strataweave.data.filters import RANKINGS
from strataweave.data.imputation import IMPUTERS
from strataweave.data.normalise import LIBRARY_SIZES
from strataweave.data.readers import ORIENTATIONS
from strataweave.data.scaling import NON_NEGATIVITY, SCALINGS
from strataweave.data.validation import KINDS
from strataweave.errors import InputError
from strataweave.evaluate import associate_clinical, enrich_markers, evaluate_survival, find_markers
from strataweave.evaluate.markers import TESTS
from strataweave.factorize.joint_nmf import PARAMETERS as NMF_PARAMETERS
from strataweave.graph.fusion import PARAMETERS as FUSION_PARAMETERS
from strataweave.parameters import (
    Parameter, Rule, RuleBroken, choice, described, either, flag, integer, list_of, number, text,
)
from strataweave.subtypes.parallel import BACKENDS
from strataweave.subtypes.settings import PARAMETERS as SWEEP_PARAMETERS


# ---------------------------------------------------------------------------------------------
# The one value rule of its own: the other rules are the estimators' (strataweave.parameters)
# ---------------------------------------------------------------------------------------------

def existing_file() -> Rule:
    """A path to an existing file, relative paths taken against the workflow file's folder."""

    def rule(value: object, base_dir: Path) -> Path:
        if not isinstance(value, str) or not value.strip():
            raise RuleBroken("a file path as a text string")
        path = Path(value).expanduser()
        resolved = (path if path.is_absolute() else base_dir / path).resolve()
        if not resolved.is_file():
            raise RuleBroken(f"an existing file (looked for {resolved})")
        return resolved

    return described(rule, "the path of an existing file, relative to the workflow file's folder")


# ---------------------------------------------------------------------------------------------
# The sections of a workflow file
# ---------------------------------------------------------------------------------------------

SAFE_NAME = r"[A-Za-z0-9][A-Za-z0-9_.-]*"


def default_of(function, parameter: str) -> object:
    """The default of a numeric layer's parameter, so the workflow and the layer never disagree."""
    return inspect.signature(function).parameters[parameter].default


def key_from(table: Mapping[str, Parameter], name: str) -> object:
    """The dataclass field of the workflow key `name`: rule, default and help from an estimator's parameter table."""
    parameter = table[name]
    return key(parameter.rule, parameter.default, doc=parameter.help)


def key(rule: Rule, *default: object, doc: str = "") -> object:
    """A dataclass field for one workflow key; no default means the key is required."""
    meta = {"rule": rule, "doc": doc}
    if default:
        return field(default=default[0], metadata=meta)
    return field(metadata=meta)


@dataclass(frozen=True)
class CohortSettings:
    """[cohort]: the clinical table and its survival columns."""

    clinical: Path = key(existing_file(), doc="clinical table, one row per patient")
    id_column: str = key(text(), "patient_id", doc="column with the patient identifiers")
    time_column: str | None = key(text(), None, doc="survival time column")
    event_column: str | None = key(text(), None, doc="event column: 1 = event, 0 = censored")
    time_unit: str | None = key(text(), None, doc="unit of the survival time, for axis labels")


PREPROCESSING = {name: default_of(Preprocessor, name) for name in inspect.signature(Preprocessor).parameters}


@dataclass(frozen=True)
class ModalitySettings:
    """[[modality]]: one omics layer, how to read it, how to normalise and filter it, its weight.

    The preprocessing keys are those of `strataweave.data.Preprocessor`.
    """

    name: str = key(text(SAFE_NAME, "a name of letters, digits, '_', '.', '-'"), doc="the layer's name in every output")
    path: Path = key(existing_file(), doc="the layer's matrix file")
    kind: str = key(choice(*KINDS), doc="what the values are; sets the normalisation")
    orientation: str | None = key(choice(*ORIENTATIONS), None, doc="omitted = detect")
    weight: float = key(number(above=0), 1.0, doc="relative weight in the factorisation")
    prior_count: float = key(number(above=0), PREPROCESSING["prior_count"], doc="counts: added before log2 CPM")
    library_size: str = key(
        choice(*LIBRARY_SIZES), PREPROCESSING["library_size"],
        doc="counts: median_ratio (robust to a few dominant features) or total",
    )
    beta_to_m: bool = key(flag(), PREPROCESSING["beta_to_m"], doc="beta: use M-values")
    quantile_normalise: bool = key(flag(), PREPROCESSING["quantile_normalise"], doc="quantile-normalise across patients")
    max_missing_fraction: float = key(
        number(0, 1), PREPROCESSING["max_missing_fraction"], doc="drop features missing in more patients"
    )
    min_variance: float = key(number(minimum=0), PREPROCESSING["min_variance"], doc="drop near-constant features")
    top_features: int = key(
        integer(1), ANALYSIS_DEFAULTS["top_features"],
        doc="keep this many features, ranked by rank_by (an analysis caps what NMF sees)",
    )
    rank_by: str = key(choice(*RANKINGS), PREPROCESSING["rank_by"], doc="how top_features ranks the features")
    impute: str = key(choice(*IMPUTERS), PREPROCESSING["impute"], doc="how missing cells of measured patients are filled")
    impute_neighbours: int = key(integer(1), PREPROCESSING["impute_neighbours"], doc="neighbours of impute = knn")
    scale: str = key(choice(*SCALINGS), PREPROCESSING["scale"], doc="scaling of each feature")
    non_negative: str = key(
        choice(*NON_NEGATIVITY), ANALYSIS_DEFAULTS["non_negative"],
        doc="how the NMF gets non-negative data; split keeps the sign of scaled data without an offset "
        "(an analysis always needs one, unlike Preprocessor's default 'none')",
    )

    def preprocessing(self) -> dict:
        """Keyword arguments of `Preprocessor` (all but name, path, orientation and weight)."""
        skipped = {"name", "path", "orientation", "weight"}
        return {f.name: getattr(self, f.name) for f in fields(self) if f.name not in skipped}


@dataclass(frozen=True)
class GraphSettings:
    """[graph]: per-modality patient-similarity graphs and the rule that fuses them."""

    n_neighbours: int = key_from(FUSION_PARAMETERS, "n_neighbours")
    metric: str = key_from(FUSION_PARAMETERS, "metric")
    kernel: str = key_from(FUSION_PARAMETERS, "kernel")
    rule: str = key_from(FUSION_PARAMETERS, "rule")
    quorum: int | None = key_from(FUSION_PARAMETERS, "quorum")
    neighbour_search: str = key_from(FUSION_PARAMETERS, "neighbour_search")


@dataclass(frozen=True)
class FactorizationSettings:
    """[factorization]: the graph-regularised joint NMF."""

    graph_weight: float = key_from(NMF_PARAMETERS, "graph_weight")
    n_restarts: int = key_from(NMF_PARAMETERS, "n_restarts")
    max_iter: int = key_from(NMF_PARAMETERS, "max_iter")
    tol: float = key_from(NMF_PARAMETERS, "tol")
    init: str = key_from(NMF_PARAMETERS, "init")
    start_from: str = key_from(SWEEP_PARAMETERS, "start_from")


@dataclass(frozen=True)
class SubtypeSettings:
    """[subtypes]: the counts to try and which one to use."""

    counts: tuple[int, ...] = key(
        list_of(integer(2), "an integer >= 2 or a list of them", allow_single=True),
        (2, 3, 4, 5, 6), doc="subtype counts to try; one value = a fixed count",
    )
    use_count: int | str = key(
        either(choice("recommended"), integer(2), "'recommended' or an integer >= 2"),
        "recommended", doc="or one of the counts, to override the recommendation",
    )
    min_size: int | None = key_from(SWEEP_PARAMETERS, "min_size")
    pac_window: tuple[float, ...] = key_from(SWEEP_PARAMETERS, "pac_window")
    pac_tolerance: float = key_from(SWEEP_PARAMETERS, "pac_tolerance")
    core_threshold: float = key_from(SWEEP_PARAMETERS, "core_threshold")
    labels_from: str = key_from(SWEEP_PARAMETERS, "labels_from")


@dataclass(frozen=True)
class ResamplingSettings:
    """[resampling]: the consensus resamples and where they run."""

    n_resamples: int = key_from(SWEEP_PARAMETERS, "n_resamples")
    fraction: float = key_from(SWEEP_PARAMETERS, "fraction")
    feature_fraction: float = key_from(SWEEP_PARAMETERS, "feature_fraction")
    resample_restarts: int = key_from(SWEEP_PARAMETERS, "resample_restarts")
    warm_start: bool = key_from(SWEEP_PARAMETERS, "warm_start")
    backend: str = key(choice(*BACKENDS), "processes", doc="results are the same on each")
    n_jobs: int = key(integer(0), 0, doc="workers; 0 = every core this process may use")
    scheduler: str | None = key(text(), None, doc="Dask scheduler address (backend = dask)")


@dataclass(frozen=True)
class EvaluationSettings:
    """[evaluation]: survival, clinical association, markers and enrichment."""

    covariates: tuple[str, ...] = key(
        list_of(text(), "a list of column names"), (), doc="Cox model: the subtype plus these columns"
    )
    strata: str | None = key(text(), None, doc="clinical column for a stratified log-rank test")
    clinical_columns: tuple[str, ...] | None = key(
        list_of(text(), "a list of column names"), None, doc="omitted = all other columns"
    )
    categorical_columns: tuple[str, ...] = key(
        list_of(text(), "a list of column names"), (), doc="numeric columns to treat as categories"
    )
    n_monte_carlo: int = key(
        integer(100), default_of(associate_clinical, "n_monte_carlo"), doc="draws for exact p-values of sparse tables"
    )
    rmst_horizon: float | None = key(
        number(above=0), None, doc="restricted mean survival time horizon; omitted = the shortest follow-up of the groups"
    )
    n_permutations: int = key(
        integer(0), default_of(evaluate_survival, "n_permutations"), doc="permutations of the log-rank p-value"
    )
    min_group_size: int = key(
        integer(1), default_of(evaluate_survival, "min_group_size"), doc="smaller groups are not tested"
    )
    marker_test: str = key(
        choice(*TESTS), default_of(find_markers, "marker_test"), doc="test of each feature, subtype against the rest"
    )
    marker_fdr: float = key(
        number(maximum=1, above=0), default_of(find_markers, "marker_fdr"),
        doc="Benjamini-Hochberg level for markers and gene sets",
    )
    markers_per_subtype: int = key(
        integer(1), default_of(find_markers, "markers_per_subtype"), doc="top markers per subtype in the report"
    )
    gene_sets: Path | None = key(existing_file(), None, doc="gene-set file; omitted = no enrichment")
    gene_set_format: str = key(choice("lines", "table"), "lines", doc="set, description, members / set, gene")
    gene_set_modality: str | None = key(text(), None, doc="modality whose markers are tested; omitted = first")
    sets_per_subtype: int = key(
        integer(1), default_of(enrich_markers, "sets_per_subtype"), doc="top gene sets per subtype in the report"
    )
    min_set_size: int = key(integer(1), default_of(enrich_markers, "min_set_size"), doc="smallest gene set tested")
    max_set_size: int = key(integer(1), default_of(enrich_markers, "max_set_size"), doc="largest gene set tested")


@dataclass(frozen=True)
class ReportSettings:
    """[report]: what the report looks like and what it may show."""

    title: str = key(text(), "Patient subtypes", doc="title of the report and the slides")
    formats: tuple[str, ...] = key(
        list_of(choice("html", "pdf"), "a list of 'html' and/or 'pdf'"), ("html", "pdf"),
        doc="[] = tables and results.json only, no figures or report",
    )
    show_patient_ids: bool = key(
        flag(), False, doc="patient IDs in the report too (never in the slides; always in assignments.tsv)"
    )


SECTIONS = {
    "cohort": CohortSettings,
    "graph": GraphSettings,
    "factorization": FactorizationSettings,
    "subtypes": SubtypeSettings,
    "resampling": ResamplingSettings,
    "evaluation": EvaluationSettings,
    "report": ReportSettings,
}

#: Keys renamed to the name of the Python parameter they feed (issue 12), by section: old -> new.
#: An old key is still an unknown key; its error names the new one.
RENAMED_KEYS = {
    "graph": {"neighbours": "n_neighbours", "fusion": "rule"},
    "factorization": {"restarts": "n_restarts", "tolerance": "tol"},
    "resampling": {"resamples": "n_resamples", "restarts": "resample_restarts", "jobs": "n_jobs"},
    "evaluation": {"monte_carlo": "n_monte_carlo", "permutations": "n_permutations"},
}


# ---------------------------------------------------------------------------------------------
# The workflow and its parser
# ---------------------------------------------------------------------------------------------

TOP_LEVEL_RULES = {"seed": integer(0, 2**32 - 1)}
DEFAULT_SEED = 0


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
            changed = dataclasses.replace(changed, resampling=dataclasses.replace(changed.resampling, n_jobs=jobs))
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
            renamed = RENAMED_KEYS.get(where, {}).get(name)
            now = f" (it is now '{where}.{renamed}')" if renamed else ""
            raise InputError(
                f"{source}: unknown key '{where}.{name}'{now}, expected one of: {', '.join(known)}"
            )
    values = {}
    for name, spec in known.items():
        if name not in table:
            if spec.default is dataclasses.MISSING:
                raise InputError(f"{source}: missing key '{where}.{name}' (required)")
            continue
        try:
            values[name] = spec.metadata["rule"](table[name], base_dir)
        except RuleBroken as broken:
            raise InputError(
                f"{source}: key '{where}.{name}': found {_found(table[name])}, expected {broken}"
            ) from None
    return cls(**values)


def _parse_modalities(raw: object, source: str, base_dir: Path) -> tuple[ModalitySettings, ...]:
    if not isinstance(raw, list) or not all(isinstance(item, dict) for item in raw):
        raise InputError(f"{source}: key 'modality': found {_found(raw)}, expected [[modality]] tables")
    modalities = []
    for position, table in enumerate(raw, start=1):
        name = table.get("name")
        label = f"modality[{name}]" if isinstance(name, str) and name.strip() else f"modality[{position}]"
        modalities.append(_parse_section(table, ModalitySettings, label, source, base_dir))
    names = [m.name for m in modalities]
    for position, name in enumerate(names, start=1):
        if names.index(name) != position - 1:
            raise InputError(f"{source}: key 'modality[{position}].name': found {name!r} again, expected unique names")
    return tuple(modalities)


def _check_combinations(flow: Workflow, source: str) -> None:
    """Rules that involve more than one key."""
    cohort, graph, subtypes = flow.cohort, flow.graph, flow.subtypes
    if (cohort.time_column is None) != (cohort.event_column is None):
        given, missing = ("time_column", "event_column") if cohort.event_column is None else ("event_column", "time_column")
        raise InputError(f"{source}: key 'cohort.{missing}': missing, expected it together with 'cohort.{given}'")
    if graph.rule == "quorum" and graph.quorum is None:
        raise InputError(f"{source}: key 'graph.quorum': missing, expected an integer when graph.rule = 'quorum'")
    if graph.quorum is not None and graph.rule != "quorum":
        raise InputError(f"{source}: key 'graph.quorum': found {graph.quorum}, expected it only with graph.rule = 'quorum'")
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
    seed = DEFAULT_SEED
    if "seed" in document:
        try:
            seed = TOP_LEVEL_RULES["seed"](document["seed"], base_dir)
        except RuleBroken as broken:
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


# ---------------------------------------------------------------------------------------------
# The reference of every key, read from the section definitions above
# ---------------------------------------------------------------------------------------------

REFERENCE_FILE = "workflows/REFERENCE.md"


def _shown(value: object) -> str:
    """A default as written in a workflow file (None: the key is left out)."""
    if value is None:
        return "left out"
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, (tuple, list)):
        return "[" + ", ".join(_shown(item) for item in value) + "]"
    return f'"{value}"' if isinstance(value, str) else str(value)


def _row(key: str, rule: Rule, default: object, doc: str) -> str:
    cells = [f"`{key}`", rule.expected, default, doc]
    return "| " + " | ".join(str(cell).replace("|", "\\|") for cell in cells) + " |"


def workflow_reference() -> str:
    """Every key of a workflow file as Markdown, one table per section: what it accepts, its default, its help."""
    header = ["| key | accepts | default | meaning |", "| --- | --- | --- | --- |"]
    lines = [
        "# Workflow file keys",
        "",
        f"Generated from `src/strataweave/workflow/config.py` by `python -m strataweave.workflow.config > {REFERENCE_FILE}`",
        "(a test keeps it in step). `workflows/synthetic_cohort.toml` shows every key in use.",
        "",
        "## Top level",
        "",
        *header,
        _row("seed", TOP_LEVEL_RULES["seed"], DEFAULT_SEED, "one seed for the whole run; each stage gets its own child seed"),
    ]
    for cls in (CohortSettings, ModalitySettings, *[cls for cls in SECTIONS.values() if cls is not CohortSettings]):
        title, _, summary = cls.__doc__.partition("\n")[0].partition(": ")
        lines += ["", f"## {title}", "", summary[:1].upper() + summary[1:], "", *header]
        for spec in fields(cls):
            default = "required" if spec.default is dataclasses.MISSING else _shown(spec.default)
            lines.append(_row(spec.name, spec.metadata["rule"], default, spec.metadata["doc"]))
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    print(workflow_reference(), end="")
