"""The sections of a workflow file: one frozen dataclass per section, one field per key.

Field names are the TOML keys. Each field carries its value rule in `metadata["rule"]`;
a field without a default is required. The parser in `workflow.config` reads these
definitions, so a key exists in exactly one place.
"""

from __future__ import annotations

import inspect
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
from strataweave.evaluate import associate_clinical, enrich_markers, evaluate_survival, find_markers
from strataweave.evaluate.markers import TESTS
from strataweave.factorize import JointNMF
from strataweave.factorize.joint_nmf import INIT_METHODS
from strataweave.graph import fuse_modalities
from strataweave.graph.kernels import KERNELS
from strataweave.graph.metrics import METRICS
from strataweave.graph.neighbours import APPROXIMATE_ABOVE, SEARCHES
from strataweave.graph.rules import RULES
from strataweave.subtypes.parallel import BACKENDS
from strataweave.subtypes.settings import LABELS_FROM, START_FROM, SweepSettings
from strataweave.workflow import rules

SAFE_NAME = r"[A-Za-z0-9][A-Za-z0-9_.-]*"


def default_of(function, parameter: str) -> object:
    """The default of a numeric layer's parameter, so the workflow and the layer never disagree."""
    return inspect.signature(function).parameters[parameter].default


def key(rule: rules.Rule, *default: object, doc: str = "") -> object:
    """A dataclass field for one workflow key; no default means the key is required."""
    meta = {"rule": rule, "doc": doc}
    if default:
        return field(default=default[0], metadata=meta)
    return field(metadata=meta)


@dataclass(frozen=True)
class CohortSettings:
    """[cohort]: the clinical table and its survival columns."""

    clinical: Path = key(rules.existing_file(), doc="clinical table, one row per patient")
    id_column: str = key(rules.text(), "patient_id", doc="column with the patient identifiers")
    time_column: str | None = key(rules.text(), None, doc="survival time column")
    event_column: str | None = key(rules.text(), None, doc="event column: 1 = event, 0 = censored")
    time_unit: str | None = key(rules.text(), None, doc="unit of the survival time, for axis labels")


PREPROCESSING = {name: default_of(Preprocessor, name) for name in inspect.signature(Preprocessor).parameters}


@dataclass(frozen=True)
class ModalitySettings:
    """[[modality]]: one omics layer, how to read it, how to normalise and filter it, its weight.

    The preprocessing keys are those of `strataweave.data.Preprocessor`.
    """

    name: str = key(rules.text(SAFE_NAME, "a name of letters, digits, '_', '.', '-'"))
    path: Path = key(rules.existing_file())
    kind: str = key(rules.choice(*KINDS))
    orientation: str | None = key(rules.choice(*ORIENTATIONS), None, doc="omitted = detect")
    weight: float = key(rules.number(above=0), 1.0, doc="relative weight in the factorisation")
    prior_count: float = key(rules.number(above=0), PREPROCESSING["prior_count"], doc="counts: added before log2 CPM")
    library_size: str = key(
        rules.choice(*LIBRARY_SIZES), PREPROCESSING["library_size"],
        doc="counts: median_ratio (robust to a few dominant features) or total",
    )
    beta_to_m: bool = key(rules.flag(), PREPROCESSING["beta_to_m"], doc="beta: use M-values")
    quantile_normalise: bool = key(rules.flag(), PREPROCESSING["quantile_normalise"])
    max_missing_fraction: float = key(
        rules.number(0, 1), PREPROCESSING["max_missing_fraction"], doc="drop features missing in more patients"
    )
    min_variance: float = key(rules.number(minimum=0), PREPROCESSING["min_variance"])
    top_features: int = key(
        rules.integer(1), ANALYSIS_DEFAULTS["top_features"],
        doc="keep this many features, ranked by rank_by (an analysis caps what NMF sees)",
    )
    rank_by: str = key(rules.choice(*RANKINGS), PREPROCESSING["rank_by"])
    impute: str = key(rules.choice(*IMPUTERS), PREPROCESSING["impute"])
    impute_neighbours: int = key(rules.integer(1), PREPROCESSING["impute_neighbours"])
    scale: str = key(rules.choice(*SCALINGS), PREPROCESSING["scale"])
    non_negative: str = key(
        rules.choice(*NON_NEGATIVITY), ANALYSIS_DEFAULTS["non_negative"],
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

    neighbours: int = key(rules.integer(2), default_of(fuse_modalities, "n_neighbours"))
    metric: str = key(rules.choice(*METRICS), default_of(fuse_modalities, "metric"))
    kernel: str = key(rules.choice(*KERNELS), default_of(fuse_modalities, "kernel"))
    fusion: str = key(rules.choice(*RULES), default_of(fuse_modalities, "rule"))
    quorum: int | None = key(rules.integer(1), None, doc="modalities that must agree (fusion = quorum)")
    neighbour_search: str = key(
        rules.choice(*SEARCHES), default_of(fuse_modalities, "neighbour_search"),
        doc=f"auto: approximate (pynndescent, seeded from the run's seed) for a modality of more than "
        f"{APPROXIMATE_ABOVE} patients when installed, exact otherwise",
    )


@dataclass(frozen=True)
class FactorizationSettings:
    """[factorization]: the graph-regularised joint NMF."""

    graph_weight: float = key(rules.number(minimum=0), default_of(JointNMF, "graph_weight"))
    restarts: int = key(
        rules.integer(1), SweepSettings.resample_restarts,
        doc="full-data fits per count, the lowest objective wins; as many as each resample has",
    )
    max_iter: int = key(rules.integer(1), default_of(JointNMF, "max_iter"))
    tolerance: float = key(rules.number(above=0), default_of(JointNMF, "tol"))
    init: str = key(rules.choice(*INIT_METHODS), default_of(JointNMF, "init"))
    start_from: str = key(
        rules.choice(*START_FROM), SweepSettings.start_from,
        doc="graph: start each fit from the spectral partition of its fused graph; init: from `init`",
    )


@dataclass(frozen=True)
class SubtypeSettings:
    """[subtypes]: the counts to try and which one to use."""

    counts: tuple[int, ...] = key(
        rules.list_of(rules.integer(2), "an integer >= 2 or a list of them", allow_single=True),
        (2, 3, 4, 5, 6),
    )
    use_count: int | str = key(
        rules.either(rules.choice("recommended"), rules.integer(2), "'recommended' or an integer >= 2"),
        "recommended",
    )
    min_size: int | None = key(
        rules.integer(1), SweepSettings.min_size,
        doc="never recommend a count with a smaller subtype (default: 2 % of the patients, at least 5)",
    )
    pac_window: tuple[float, ...] = key(
        rules.list_of(rules.number(0, 1), "two numbers between 0 and 1, lower first"), SweepSettings.pac_window
    )
    pac_tolerance: float = key(rules.number(minimum=0), SweepSettings.pac_tolerance, doc="PAC differences below this are ties")
    core_threshold: float = key(rules.number(0, 1), SweepSettings.core_threshold, doc="mean consensus with the own subtype")
    labels_from: str = key(
        rules.choice(*LABELS_FROM), SweepSettings.labels_from,
        doc="best_fit: the candidate partition with the highest modularity on the fused graph; or one candidate",
    )


@dataclass(frozen=True)
class ResamplingSettings:
    """[resampling]: the consensus resamples and where they run."""

    resamples: int = key(rules.integer(2), SweepSettings.n_resamples)
    fraction: float = key(rules.number(maximum=1, above=0), SweepSettings.fraction, doc="share of patients per resample")
    feature_fraction: float = key(rules.number(maximum=1, above=0), SweepSettings.feature_fraction, doc="share of features per resample")
    restarts: int = key(rules.integer(1), SweepSettings.resample_restarts, doc="NMF restarts per resample")
    warm_start: bool = key(rules.flag(), SweepSettings.warm_start, doc="start resamples from the full-data factors")
    backend: str = key(rules.choice(*BACKENDS), "processes", doc="results are the same on each")
    jobs: int = key(rules.integer(0), 0, doc="workers; 0 = every core this process may use")
    scheduler: str | None = key(rules.text(), None, doc="Dask scheduler address (backend = dask)")


@dataclass(frozen=True)
class EvaluationSettings:
    """[evaluation]: survival, clinical association, markers and enrichment."""

    covariates: tuple[str, ...] = key(rules.list_of(rules.text(), "a list of column names"), ())
    strata: str | None = key(rules.text(), None, doc="clinical column for a stratified log-rank test")
    clinical_columns: tuple[str, ...] | None = key(
        rules.list_of(rules.text(), "a list of column names"), None, doc="omitted = all other columns"
    )
    categorical_columns: tuple[str, ...] = key(
        rules.list_of(rules.text(), "a list of column names"), (), doc="numeric columns to treat as categories"
    )
    monte_carlo: int = key(
        rules.integer(100), default_of(associate_clinical, "n_monte_carlo"), doc="draws for exact p-values of sparse tables"
    )
    rmst_horizon: float | None = key(rules.number(above=0), None)
    permutations: int = key(rules.integer(0), default_of(evaluate_survival, "n_permutations"))
    min_group_size: int = key(rules.integer(1), default_of(evaluate_survival, "min_group_size"))
    marker_test: str = key(rules.choice(*TESTS), default_of(find_markers, "test"))
    marker_fdr: float = key(rules.number(maximum=1, above=0), default_of(find_markers, "fdr"))
    markers_per_subtype: int = key(rules.integer(1), default_of(find_markers, "top_n"))
    gene_sets: Path | None = key(rules.existing_file(), None)
    gene_set_format: str = key(rules.choice("lines", "table"), "lines", doc="set, description, members / set, gene")
    gene_set_modality: str | None = key(rules.text(), None, doc="modality whose markers are tested; omitted = first")
    sets_per_subtype: int = key(rules.integer(1), default_of(enrich_markers, "top_n"))
    min_set_size: int = key(rules.integer(1), default_of(enrich_markers, "min_size"))
    max_set_size: int = key(rules.integer(1), default_of(enrich_markers, "max_size"))


@dataclass(frozen=True)
class ReportSettings:
    """[report]: what the report looks like and what it may show."""

    title: str = key(rules.text(), "Patient subtypes")
    formats: tuple[str, ...] = key(
        rules.list_of(rules.choice("html", "pdf"), "a list of 'html' and/or 'pdf'"), ("html", "pdf"),
        doc="[] = tables and results.json only, no figures or report",
    )
    show_patient_ids: bool = key(rules.flag(), False)


SECTIONS = {
    "cohort": CohortSettings,
    "graph": GraphSettings,
    "factorization": FactorizationSettings,
    "subtypes": SubtypeSettings,
    "resampling": ResamplingSettings,
    "evaluation": EvaluationSettings,
    "report": ReportSettings,
}
