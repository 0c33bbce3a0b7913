"""What the report reads from a run folder, written down once, and the check that enforces it.

The report renders only from the run folder; it never recomputes a statistic. The
workflow writes, and this module documents, three things:

``results.json`` (:data:`RESULTS`)
    Every number the report shows. Required: ``caution``, ``subtype_count``, ``cohort`` and
    ``subtypes``. Every other top-level section is optional; an absent section means the
    report leaves that section out (no survival columns -> no ``survival``; no modalities,
    as in ``strataweave evaluate`` without omics -> no ``markers`` and no ``enrichment``);
    ``not_run`` then says why in words, and the report and the slides show that instead.
    Floats that could not be computed are ``null`` where the entry says "may be null".
    Subtypes are named by the strings in ``subtypes.labels``; everywhere else a subtype is
    referred to by its *code*, the 0-based position in that list.

``stages/figure_data.npz`` (:data:`ARRAYS`, saved with ``numpy.savez``, read with
    ``allow_pickle=False``: numbers, booleans and fixed-width unicode only)
    Arrays too large for JSON. All per-patient arrays share one patient order (the
    cohort's patients, any fixed order). Array names never contain user strings: a
    modality is named by its position ``i`` in ``cohort.modalities`` or ``markers``, a
    subtype count by its value ``k``, a survival group by its code ``g``.

``manifest.json`` (:data:`MANIFEST`)
    Read for the reproducibility section only; every key is optional there.

Use :func:`check_results` and :func:`check_figure_data` before rendering: each raises
:class:`strataweave.InputError` naming the first missing or malformed key.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from numbers import Integral, Real
from typing import Any, Mapping

import numpy as np

from strataweave.errors import InputError

RESULTS_FILE = "results.json"
FIGURE_DATA_FILE = "stages/figure_data.npz"
COMPARISON_FIGURE = "comparison"  # comparison.png and comparison.svg of `strataweave compare`
COMPARISON_PAGE = "comparison.html"
MANIFEST_FILE = "manifest.json"


@dataclass(frozen=True)
class Entry:
    """One key of a JSON document: its kind, its meaning, and whether it must be there.

    kinds: ``text``, ``integer``, ``number``, ``flag``, ``texts`` / ``integers`` /
    ``numbers`` (lists), ``series`` (object of name -> list of numbers), ``mapping`` (any
    JSON object), ``section`` (object whose keys are ``keys``), ``rows`` (list of objects
    whose keys include ``keys``; extra keys are allowed and shown in tables).
    """

    kind: str
    meaning: str
    required: bool = True
    nullable: bool = False
    keys: Mapping[str, "Entry"] = field(default_factory=dict)


def _section(meaning: str, keys: Mapping[str, Entry], required: bool = True) -> Entry:
    return Entry("section", meaning, required=required, keys=keys)


def _rows(meaning: str, keys: Mapping[str, Entry], required: bool = True) -> Entry:
    return Entry("rows", meaning, required=required, keys=keys)


_P = "may be null when not tested"

_GENE_SET_ROW = {
    "subtype": Entry("text", "subtype label"),
    "gene_set": Entry("text", "gene-set name (user text)"),
    "set_size": Entry("integer", "set members among the measured features"),
    "p_adjusted": Entry("number", "Benjamini-Hochberg adjusted p", nullable=True),
}

#: The keys of results.json that the report reads.
RESULTS: dict[str, Entry] = {
    "caution": Entry("text", "the caution text, strataweave.caution.CAUTION, verbatim"),
    "subtype_count": Entry("integer", "the number of subtypes used for the final labels"),
    "report": _section(
        "report options taken from the workflow file",
        {
            "title": Entry("text", "title of the report and the slides (user text)", required=False),
            "show_patient_ids": Entry(
                "flag", "true only when the workflow allows patient IDs in the report", required=False
            ),
        },
        required=False,
    ),
    "cohort": _section(
        "the cohort as analysed",
        {
            "patients": Entry("integer", "patients in the analysis (in the clinical table and >= 1 modality)"),
            "modalities": _rows(
                "one row per modality, in workflow order (index i names the npz arrays)",
                {
                    "name": Entry("text", "modality name from the workflow file"),
                    "kind": Entry("text", "counts | beta | abundance | log_expression | copy_number"),
                    "patients": Entry("integer", "patients measured in this modality"),
                    "features_in_file": Entry("integer", "features read from the file"),
                    "filters": _rows(
                        "features kept after each filter step, in order",
                        {
                            "step": Entry("text", "filter name, e.g. missing, variance, top_features"),
                            "features_after": Entry("integer", "features left after this step"),
                        },
                    ),
                    "missing_fraction": Entry(
                        "number", "fraction of missing cells among measured patients, before imputation"
                    ),
                },
            ),
        },
    ),
    "graph": _section(
        "the fused patient-similarity graph",
        {
            "rule": Entry("text", "fusion rule used: intersection | quorum | average | diffusion"),
            "quorum": Entry("integer", "modalities that had to agree (rule quorum)", required=False, nullable=True),
            "rule_requested": Entry("text", "rule asked for: auto (chosen from the data) or a named rule", required=False),
            "rule_evidence": _rows(
                "each candidate fusion rule with the share of its edge weight the modalities confirm",
                {
                    "rule": Entry("text", "candidate rule"),
                    "quorum": Entry("integer", "candidate quorum", nullable=True),
                    "confirmed_share": Entry("number", "mean over modalities of the confirmed share of edge weight"),
                    "chosen": Entry("flag", "the candidate used"),
                },
                required=False,
            ),
            "neighbours": Entry("integer", "neighbours kept per patient"),
            "neighbour_search": Entry("mapping", "modality name -> exact | approximate: how its neighbours were found",
                                      required=False),
            "neighbour_search_requested": Entry("text", "search asked for: auto | exact | approximate", required=False),
            "approximate_above": Entry("integer", "auto searches approximately in a modality with more patients",
                                       required=False),
            "isolated_patients": Entry("integer", "patients left without an edge by the rule"),
            "fallback_patients": Entry("integer", "patients given fallback edges from the average graph"),
            "components": Entry("integer", "connected components of the fused graph", required=False),
            "agreement": _rows(
                "overlap of neighbour sets for each pair of modalities",
                {
                    "modality_a": Entry("text", "first modality name"),
                    "modality_b": Entry("text", "second modality name"),
                    "overlap": Entry("number", "mean fraction of shared neighbours, 0..1"),
                },
            ),
        },
        required=False,
    ),
    "selection": _section(
        "how many subtypes: the sweep of subtype counts",
        {
            "counts": Entry("integers", "subtype counts tried, ascending"),
            "criteria": Entry(
                "series",
                "criterion name -> one value per count (null where undefined), e.g. pac, "
                "cophenetic, silhouette, eigengap, reconstruction_error, smallest_size, stability, modularity",
            ),
            "higher_is_better": Entry(
                "mapping", "criterion name -> true / false / null (no direction); drawn as a hint", required=False
            ),
            "recommended": Entry("integer", "the count the rule recommends"),
            "reason": Entry("text", "the recommendation's reason in one sentence"),
            "overridden": Entry("flag", "true when the user fixed the count instead", required=False),
            "consensus_patients": Entry(
                "integer", "patients the kept consensus matrices cover (the cophenetic correlation and the figure): "
                "all of them, or a seeded sample in a large cohort; PAC and core patients cover every pair",
                required=False,
            ),
            "flow": _rows(
                "how subtypes split from count k to k+1 (only non-zero cells)",
                {
                    "count": Entry("integer", "the smaller count k"),
                    "source": Entry("integer", "subtype code at count k"),
                    "target": Entry("integer", "subtype code at count k+1"),
                    "patients": Entry("integer", "patients moving from source to target"),
                },
                required=False,
            ),
        },
        required=False,
    ),
    "subtypes": _section(
        "the final subtypes",
        {
            "labels": Entry("texts", "display name of each subtype; position = subtype code"),
            "sizes": Entry("integers", "patients per subtype, in code order"),
            "core_threshold": Entry(
                "number", "mean consensus with the own subtype above which a patient is core", required=False
            ),
            "given": Entry(
                "flag", "true when the grouping was given by the user (`strataweave evaluate`): the report "
                "then speaks of groups and leaves out confidence and core patients", required=False
            ),
        },
    ),
    "baselines": _rows(
        "comparison of the subtypes with the baseline methods at the final count",
        {
            "method": Entry("text", "baseline name, e.g. spectral clustering on the fused graph"),
            "ari": Entry("number", "adjusted Rand index against the final subtypes"),
            "nmi": Entry("number", "normalised mutual information against the final subtypes"),
        },
        required=False,
    ),
    "survival": _section(
        "outcome by subtype (or by the grouping given to `evaluate`)",
        {
            "groups": Entry(
                "texts", "group names, position = group code g; default: subtypes.labels", required=False
            ),
            "time_unit": Entry("text", "unit of the survival time for axis labels, e.g. months", required=False),
            "not_tested": Entry("text", "reason when the guard rails stopped the tests", required=False, nullable=True),
            "logrank": _section(
                "multi-group log-rank test",
                {
                    "statistic": Entry("number", "chi-square statistic", nullable=True),
                    "df": Entry("integer", "degrees of freedom", nullable=True),
                    "p_value": Entry("number", "asymptotic p-value", nullable=True),
                    "p_value_permutation": Entry("number", f"permutation p-value; {_P}", nullable=True),
                    "permutations": Entry("integer", "number of permutations", required=False),
                },
            ),
            "cox": _rows(
                "Cox model terms (group plus covariates)",
                {
                    "term": Entry("text", "term name"),
                    "hazard_ratio": Entry("number", "hazard ratio", nullable=True),
                    "ci_lower": Entry("number", "lower 95% limit", nullable=True),
                    "ci_upper": Entry("number", "upper 95% limit", nullable=True),
                    "p_value": Entry("number", "Wald p-value", nullable=True),
                },
            ),
            "concordance": Entry("number", "concordance of the Cox model", required=False, nullable=True),
            "ph_global": _section(
                "global Schoenfeld test of the fitted Cox model (one df per term)",
                {
                    "statistic": Entry("number", "chi-square statistic"),
                    "df": Entry("integer", "degrees of freedom (Cox terms)"),
                    "p_value": Entry("number", "p-value"),
                },
                required=False,
            ),
            "ph_check": _rows(
                "per-term Schoenfeld tests, unadjusted",
                {"term": Entry("text", "term name"), "p_value": Entry("number", "p-value", nullable=True)},
                required=False,
            ),
            "ph_warning": Entry(
                "text", "plain-words warning and advice when the global proportional-hazards test fails", required=False,
                nullable=True
            ),
            "medians": _rows(
                "median survival per group",
                {"group": Entry("text", "group name"), "median": Entry("number", "median", nullable=True)},
                required=False,
            ),
            "rmst_horizon": Entry("number", "horizon of the restricted mean survival time", required=False),
            "rmst": _rows(
                "restricted mean survival time per group (extra columns shown as given)",
                {"group": Entry("text", "group name"), "rmst": Entry("number", "RMST up to the horizon")},
                required=False,
            ),
            "pairwise": _rows(
                "pairwise log-rank tests (extra columns shown as given)",
                {
                    "group_a": Entry("text", "first group"),
                    "group_b": Entry("text", "second group"),
                    "p_adjusted": Entry("number", "Benjamini-Hochberg adjusted p", nullable=True),
                },
                required=False,
            ),
        },
        required=False,
    ),
    "clinical": _rows(
        "association of the subtypes with each clinical variable (extra columns shown as given)",
        {
            "variable": Entry("text", "clinical column name (user text)"),
            "test": Entry("text", "test used, e.g. chi-square, Fisher exact, Kruskal-Wallis"),
            "effect_size": Entry("number", "effect size", nullable=True),
            "effect_size_name": Entry("text", "e.g. Cramer's V, epsilon squared"),
            "p_value": Entry("number", "p-value", nullable=True),
            "p_adjusted": Entry("number", "Benjamini-Hochberg adjusted p", nullable=True),
            "dropped": Entry("integer", "patients dropped for missing values", required=False),
        },
        required=False,
    ),
    "clinical_summary": _section(
        "each clinical variable described per group (the table of clinical_summary.tsv)",
        {
            "groups": Entry("texts", "group names, in the order of their columns"),
            "rows": _rows(
                "one row per level of a categorical variable (n (%)) or per continuous variable (median [IQR]); "
                "one text key per group holds the cell",
                {
                    "variable": Entry("text", "clinical column name (user text)"),
                    "level": Entry("text", "level, 'median [IQR]' or 'missing'"),
                    "test": Entry("text", "the variable's test on its first row, else empty"),
                    "p_adjusted": Entry("number", "Benjamini-Hochberg adjusted p on the first row", nullable=True),
                },
            ),
        },
        required=False,
    ),
    "markers": _rows(
        "per modality, in the order of the npz arrays markers_{i}_*",
        {
            "modality": Entry("text", "modality name"),
            "test": Entry("text", "e.g. Mann-Whitney U", required=False),
            "rows": _rows(
                "top markers per subtype (extra columns shown as given)",
                {
                    "subtype": Entry("text", "subtype label"),
                    "feature": Entry("text", "feature name (user text)"),
                    "effect": Entry("number", "difference of means on the normalised scale"),
                    "auc": Entry("number", "area under the ROC curve, subtype against the rest"),
                    "p_adjusted": Entry("number", "Benjamini-Hochberg adjusted p", nullable=True),
                },
            ),
        },
        required=False,
    ),
    "enrichment": _rows(
        "over-represented gene sets per subtype (top rows per subtype; extra columns shown)",
        {**_GENE_SET_ROW, "overlap": Entry("integer", "subtype markers in the set")},
        required=False,
    ),
    "enrichment_summary": _section(
        "counts behind the enrichment and the rank-based competitive gene-set test",
        {
            "rank_test_rows": _rows(
                "gene sets whose members' marker scores rank above the other features' (top rows per subtype)",
                {**_GENE_SET_ROW, "auc": Entry("number", "chance that a member outranks a non-member, 0..1")},
                required=False,
            ),
        },
        required=False,
    ),
    "not_run": Entry(
        "mapping",
        "analyses left out, each by the name of its section (survival, clinical, markers, enrichment, "
        "graph_agreement) or markers/<modality>, with the reason as text starting 'not run: '",
        required=False,
    ),
    "parameters": Entry(
        "mapping",
        "parameters actually used, nested by workflow section; the methods paragraph reads "
        "seed, graph.{rule,n_neighbours,kernel,metric}, factorization.{graph_weight,n_restarts,max_iter}, "
        "resampling.{n_resamples,fraction,backend}, subtypes.{counts,pac_window,min_size,core_threshold}, "
        "evaluation.{n_permutations,marker_test,rmst_horizon,covariates,strata} when present",
        required=False,
    ),
}

#: The keys of manifest.json that the reproducibility section reads (all optional).
MANIFEST: dict[str, Entry] = {
    "command": Entry("texts", "the exact command line that reruns the analysis, as argv words", required=False),
    "created": Entry("text", "ISO time the run started", required=False),
    "strataweave_version": Entry("text", "package version", required=False),
    "python": Entry("text", "Python version", required=False),
    "platform": Entry("text", "platform string", required=False),
    "packages": Entry("mapping", "package name -> version", required=False),
    "seed": Entry("integer", "the workflow seed", required=False),
    "workflow": Entry("mapping", "the workflow file as run: {path, sha256, text}", required=False),
    "inputs": Entry("mapping", "input path -> sha256", required=False),
    "stages": Entry("mapping", "stage name -> {seconds, key}", required=False),
}


@dataclass(frozen=True)
class ArraySpec:
    """One array of figure_data.npz: name template, dtype kind, shape, meaning and when it is needed."""

    name: str
    dtype: str  # numpy dtype kind(s) accepted: "f" float, "i" integer, "b" bool, "U" unicode
    shape: str
    meaning: str
    needed_when: str


#: The arrays of stages/figure_data.npz. n = cohort patients; M = modalities; k = a count.
ARRAYS: tuple[ArraySpec, ...] = (
    ArraySpec("subtype_code", "i", "(n,)", "final subtype code of each patient", "always"),
    ArraySpec("confidence", "f", "(n,)", "assignment confidence of each patient, 0..1", "always"),
    ArraySpec("core", "b", "(n,)", "core flag of each patient", "always"),
    ArraySpec("presence", "b", "(n, M)", "patient measured in modality i (columns in cohort.modalities order)", "always"),
    ArraySpec("embedding", "f", "(n, 2)", "2-D spectral embedding of the fused graph", "graph present"),
    ArraySpec(
        "patient_ids", "U", "(n,)", "patient IDs; read only when report.show_patient_ids is true", "optional"
    ),
    ArraySpec(
        "consensus_k{k}",
        "f",
        "(c, c)",
        "consensus matrix at count k, rows and columns ordered by subtype at k; c <= 600 "
        "(the workflow keeps an evenly spaced subsample of the ordered patients when larger)",
        "selection present, each k in selection.counts",
    ),
    ArraySpec(
        "consensus_k{k}_codes", "i", "(c,)", "subtype code at count k of each row, non-decreasing", "with consensus_k{k}"
    ),
    ArraySpec("km_{g}_time", "f", "(t_g,)", "Kaplan-Meier step times of group g, starting at 0", "survival present"),
    ArraySpec("km_{g}_survival", "f", "(t_g,)", "Kaplan-Meier survival of group g at those times", "survival present"),
    ArraySpec("km_{g}_lower", "f", "(t_g,)", "lower 95% confidence limit", "survival present"),
    ArraySpec("km_{g}_upper", "f", "(t_g,)", "upper 95% confidence limit", "survival present"),
    ArraySpec("km_at_risk_time", "f", "(a,)", "times at which numbers at risk are shown", "survival present"),
    ArraySpec("km_at_risk", "i", "(G, a)", "patients at risk per group at those times", "survival present"),
    ArraySpec(
        "markers_{i}_values",
        "f",
        "(f, p)",
        "heatmap block of modality markers[i]: top markers (rows) x measured patients ordered by "
        "subtype (columns), each row centred and scaled across patients for display",
        "markers present",
    ),
    ArraySpec("markers_{i}_features", "U", "(f,)", "feature name of each heatmap row", "markers present"),
    ArraySpec("markers_{i}_feature_code", "i", "(f,)", "subtype code each marker row belongs to", "markers present"),
    ArraySpec("markers_{i}_patient_code", "i", "(p,)", "subtype code of each heatmap column, non-decreasing", "markers present"),
    ArraySpec("modality_{m}_map", "f", "(p_m, 2)", "first two principal components of modality m's normalised profile, "
              "its grouped patients with at least 3 of them (absent otherwise)", "optional"),
    ArraySpec("modality_{m}_map_codes", "i", "(p_m,)", "subtype code of each patient of modality_{m}_map", "optional"),
    ArraySpec("modality_{m}_map_variance", "f", "(2,)", "share of the variance of each of the two components",
              "optional"),
    ArraySpec("modality_separation", "f", "(M, K)", "mean silhouette of each subtype's patients in each modality, "
              "-1..1, NaN where not measured", "optional"),
    ArraySpec("factor_contribution", "f", "(M, r)", "share of factor j's loading held by modality m (columns sum to 1)",
              "optional"),
    ArraySpec("factor_top_share", "f", "(r, t)", "share of factor j's loading held by each of its top features",
              "optional"),
    ArraySpec("factor_top_feature", "U", "(r, t)", "name of each top feature ('name +' / 'name -': a sign-split part)",
              "optional"),
    ArraySpec("factor_top_modality", "i", "(r, t)", "modality position of each top feature", "optional"),
    ArraySpec("factor_subtype_mean", "f", "(K, r)", "mean patient factor of each subtype", "optional"),
    ArraySpec("volcano_{i}_difference", "f", "(K, F)", "marker block i: difference of means, subtype minus the rest, "
              "of every feature tested", "optional"),
    ArraySpec("volcano_{i}_p", "f", "(K, F)", "marker block i: p of every feature's test", "optional"),
    ArraySpec("volcano_{i}_significant", "b", "(K, F)", "adjusted p below the marker threshold", "optional"),
    ArraySpec("volcano_{i}_features", "U", "(F,)", "feature names of the volcano columns", "optional"),
)


def _is_number(value: Any) -> bool:
    return isinstance(value, Real) and not isinstance(value, bool)


def _is_integer(value: Any) -> bool:
    return isinstance(value, Integral) and not isinstance(value, bool)


_SCALAR_CHECKS = {
    "text": (lambda v: isinstance(v, str), "a string"),
    "integer": (_is_integer, "an integer"),
    "number": (_is_number, "a number"),
    "flag": (lambda v: isinstance(v, bool), "true or false"),
    "mapping": (lambda v: isinstance(v, dict), "an object"),
}

_LIST_CHECKS = {"texts": "text", "integers": "integer", "numbers": "number"}


def _where(source: str, path: str) -> str:
    return f"{source}: key '{path}'"


def _check_value(value: Any, entry: Entry, path: str, source: str) -> None:
    if value is None:
        if entry.nullable:
            return
        raise InputError(f"{_where(source, path)} is null; expected {entry.kind} ({entry.meaning})")
    if entry.kind in _SCALAR_CHECKS:
        test, expected = _SCALAR_CHECKS[entry.kind]
        if not test(value):
            raise InputError(f"{_where(source, path)} is {value!r:.60}; expected {expected} ({entry.meaning})")
    elif entry.kind in _LIST_CHECKS:
        if not isinstance(value, list):
            raise InputError(f"{_where(source, path)} is {type(value).__name__}; expected a list ({entry.meaning})")
        item = Entry(_LIST_CHECKS[entry.kind], entry.meaning)
        for position, element in enumerate(value):
            _check_value(element, item, f"{path}[{position}]", source)
    elif entry.kind == "series":
        if not isinstance(value, dict):
            raise InputError(f"{_where(source, path)} is {type(value).__name__}; expected an object ({entry.meaning})")
        item = Entry("number", entry.meaning, nullable=True)
        for name, values in value.items():
            if not isinstance(values, list):
                raise InputError(f"{_where(source, f'{path}.{name}')} is not a list; expected one number per count")
            for position, element in enumerate(values):
                _check_value(element, item, f"{path}.{name}[{position}]", source)
    elif entry.kind == "section":
        if not isinstance(value, dict):
            raise InputError(f"{_where(source, path)} is {type(value).__name__}; expected an object ({entry.meaning})")
        _check_keys(value, entry.keys, f"{path}.", source)
    elif entry.kind == "rows":
        if not isinstance(value, list):
            raise InputError(f"{_where(source, path)} is {type(value).__name__}; expected a list of rows ({entry.meaning})")
        for position, row in enumerate(value):
            if not isinstance(row, dict):
                raise InputError(f"{_where(source, f'{path}[{position}]')} is not an object; expected a row")
            _check_keys(row, entry.keys, f"{path}[{position}].", source)


def _check_keys(document: Mapping[str, Any], spec: Mapping[str, Entry], prefix: str, source: str) -> None:
    for key, entry in spec.items():
        if key not in document:
            if entry.required:
                raise InputError(f"{_where(source, prefix + key)} is missing; expected {entry.kind} ({entry.meaning})")
            continue
        _check_value(document[key], entry, prefix + key, source)


def _check_lengths(results: Mapping[str, Any], source: str) -> None:
    count = results["subtype_count"]
    for key in ("labels", "sizes"):
        found = len(results["subtypes"][key])
        if found != count:
            raise InputError(
                f"{_where(source, 'subtypes.' + key)} has {found} entries; expected subtype_count = {count}"
            )
    selection = results.get("selection")
    if selection is not None:
        counts = selection["counts"]
        for name, values in selection["criteria"].items():
            if len(values) != len(counts):
                raise InputError(
                    f"{_where(source, 'selection.criteria.' + name)} has {len(values)} values; "
                    f"expected one per count ({len(counts)})"
                )


def check_results(results: Mapping[str, Any], source: str = RESULTS_FILE) -> None:
    """Raise InputError naming the first key of `results` that breaks :data:`RESULTS`."""
    if not isinstance(results, dict):
        raise InputError(f"{source}: top level is {type(results).__name__}; expected an object")
    _check_keys(results, RESULTS, "", source)
    _check_lengths(results, source)


def check_manifest(manifest: Mapping[str, Any], source: str = MANIFEST_FILE) -> None:
    """Raise InputError naming the first key of `manifest` whose value breaks :data:`MANIFEST`."""
    if not isinstance(manifest, dict):
        raise InputError(f"{source}: top level is {type(manifest).__name__}; expected an object")
    _check_keys(manifest, MANIFEST, "", source)


def survival_groups(results: Mapping[str, Any]) -> list[str]:
    """Names of the survival groups: survival.groups, else the subtype labels."""
    return list(results["survival"].get("groups") or results["subtypes"]["labels"])


def expected_arrays(results: Mapping[str, Any]) -> list[tuple[str, ArraySpec]]:
    """The concrete npz array names (templates expanded) that `results` calls for, with their spec."""
    present = {
        "always": True,
        "optional": False,
        "graph present": "graph" in results,
        "survival present": "survival" in results,
        "markers present": "markers" in results,
    }
    names: list[tuple[str, ArraySpec]] = []
    for spec in ARRAYS:
        if spec.needed_when == "optional":
            continue
        if "{k}" in spec.name:
            if "selection" in results:
                names += [(spec.name.format(k=k), spec) for k in results["selection"]["counts"]]
        elif "{g}" in spec.name:
            if "survival" in results:
                names += [(spec.name.format(g=g), spec) for g in range(len(survival_groups(results)))]
        elif "{i}" in spec.name:
            if "markers" in results:
                names += [(spec.name.format(i=i), spec) for i in range(len(results["markers"]))]
        elif present[spec.needed_when]:
            names.append((spec.name, spec))
    return names


def _check_shapes(arrays: Mapping[str, np.ndarray], results: Mapping[str, Any], source: str) -> None:
    n = arrays["subtype_code"].shape[0]
    n_modalities = len(results["cohort"]["modalities"])
    wanted = {"confidence": (n,), "core": (n,), "presence": (n, n_modalities), "embedding": (n, 2)}
    if "patient_ids" in arrays:
        wanted["patient_ids"] = (n,)
    if "survival" in results:
        wanted["km_at_risk"] = (len(survival_groups(results)), arrays["km_at_risk_time"].shape[0])
    for name, shape in wanted.items():
        if name in arrays and arrays[name].shape != shape:
            raise InputError(f"{source}: array '{name}' has shape {arrays[name].shape}; expected {shape}")
    codes = arrays["subtype_code"]
    if codes.size and (codes.min() < 0 or codes.max() >= results["subtype_count"]):
        raise InputError(
            f"{source}: array 'subtype_code' holds codes {codes.min()}..{codes.max()}; "
            f"expected 0..{results['subtype_count'] - 1}"
        )


def check_figure_data(arrays: Mapping[str, np.ndarray], results: Mapping[str, Any], source: str = FIGURE_DATA_FILE) -> None:
    """Raise InputError naming the first array that `results` calls for and `arrays` lacks or mis-types."""
    for name, spec in expected_arrays(results):
        if name not in arrays:
            raise InputError(f"{source}: array '{name}' is missing; expected {spec.shape} ({spec.meaning})")
        kind = arrays[name].dtype.kind
        accepted = "iu" if spec.dtype == "i" else spec.dtype
        if kind not in accepted:
            raise InputError(f"{source}: array '{name}' has dtype {arrays[name].dtype}; expected kind '{spec.dtype}'")
    _check_shapes(arrays, results, source)
