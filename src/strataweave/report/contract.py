"""What the report reads from a run folder, written down once, and the checks that enforce it.

The report renders only from the run folder; it never recomputes a statistic. The
workflow writes, and this module documents, three things:

``results.json`` (:data:`RESULTS`)
    Every number the report shows. Required: ``caution``, ``subtype_count``, ``cohort`` and
    ``subtypes``. Every other top-level section is optional; an absent section means the
    report leaves that section out (no survival columns -> no ``survival``; no modalities,
    as in ``strataweave evaluate`` without omics -> no ``markers`` and no ``enrichment``);
    ``not_run`` then says why in words, and the report and the slides show that instead.
    Subtypes are named by the strings in ``subtypes.labels``; everywhere else a subtype is
    referred to by its *code*, the 0-based position in that list. Rows may carry more keys
    than listed; the tables show them as given.

``stages/figure_data.npz`` (:data:`ARRAYS`, saved with ``numpy.savez``, read with
    ``allow_pickle=False``: numbers, booleans and fixed-width unicode only)
    Arrays too large for JSON. All per-patient arrays share one patient order. Array names
    never contain user strings: a modality is named by its position in ``cohort.modalities``
    or ``markers``, a subtype count by its value ``k``, a survival group by its code ``g``.

``manifest.json`` (:data:`MANIFEST`)
    Read for the reproducibility section only; every key is optional there.

The notation of RESULTS and MANIFEST: a key ending in ``?`` may be absent; a value is a
type (``str``, ``int``, ``float`` for any number, ``bool``, ``dict`` for any object), a
pair ``(type, None)`` that may also be null, a one-element list (a list of such values),
or a dict of keys (an object with at least those keys; ``{str: spec}``: any names).

Use :func:`check_results` and :func:`check_figure_data` before rendering: each raises
:class:`strataweave.InputError` naming the first missing or malformed key.
"""

from __future__ import annotations

import re
from numbers import Integral, Real
from typing import Any, Mapping

import numpy as np

from strataweave.errors import InputError

RESULTS_FILE = "results.json"
FIGURE_DATA_FILE = "stages/figure_data.npz"
COMPARISON_FIGURE = "comparison"  # comparison.png and comparison.svg of `strataweave compare`
COMPARISON_PAGE = "comparison.html"
MANIFEST_FILE = "manifest.json"

NUMBER_OR_NULL = (float, None)  # null where the value could not be computed or was not tested

_GENE_SET_ROW = {"subtype": str, "gene_set": str, "set_size": int, "p_adjusted": NUMBER_OR_NULL}

#: The keys of results.json that the report reads.
RESULTS: dict[str, Any] = {
    "caution": str,  # strataweave.caution.CAUTION, verbatim
    "subtype_count": int,  # the number of subtypes of the final labels
    "report?": {"title?": str, "show_patient_ids?": bool},  # patient IDs in the HTML only when true
    "cohort": {
        "patients": int,  # in the clinical table and measured on >= 1 modality
        "modalities": [{  # in workflow order: position i names the npz arrays
            "name": str,
            "kind": str,  # counts | beta | abundance | log_expression | copy_number
            "patients": int,
            "features_in_file": int,
            "filters": [{"step": str, "features_after": int}],  # in the order run
            "missing_fraction": float,  # among measured patients, before imputation
        }],
    },
    "graph?": {
        "rule": str,  # intersection | quorum | average | diffusion
        "quorum?": (int, None),
        "rule_requested?": str,  # auto or a named rule
        "rule_evidence?": [{"rule": str, "quorum": (int, None), "confirmed_share": float, "chosen": bool}],
        "neighbours": int,
        "neighbour_search?": dict,  # modality -> exact | approximate
        "neighbour_search_requested?": str,
        "approximate_above?": int,
        "isolated_patients": int,
        "fallback_patients": int,
        "components?": int,
        "agreement": [{"modality_a": str, "modality_b": str, "overlap": float}],  # mean shared neighbours, 0..1
    },
    "selection?": {
        "counts": [int],  # ascending
        "criteria": {str: [NUMBER_OR_NULL]},  # criterion -> one value per count
        "higher_is_better?": dict,  # criterion -> true / false / null (no direction)
        "recommended": int,  # the rule's count
        "reason": str,
        "overridden?": bool,  # the user fixed the count
        "consensus_patients?": int,  # patients the kept consensus matrices cover
        "flow?": [{"count": int, "source": int, "target": int, "patients": int}],  # count k to the next
    },
    "subtypes": {
        "labels": [str],  # position = subtype code
        "sizes": [int],
        "core_threshold?": float,
        "given?": bool,  # a grouping given to `evaluate`: groups, without confidence or core patients
    },
    "baselines?": [{"method": str, "ari": float, "nmi": float}],
    "survival?": {
        "groups?": [str],  # position = group code g; default subtypes.labels
        "time_unit?": str,
        "not_tested?": (str, None),  # why the guard rails stopped the tests
        "logrank": {"statistic": NUMBER_OR_NULL, "df": (int, None), "p_value": NUMBER_OR_NULL,
                    "p_value_permutation": NUMBER_OR_NULL, "permutations?": int},
        "cox": [{"term": str, "hazard_ratio": NUMBER_OR_NULL, "ci_lower": NUMBER_OR_NULL, "ci_upper": NUMBER_OR_NULL,
                 "p_value": NUMBER_OR_NULL}],
        "concordance?": NUMBER_OR_NULL,
        "ph_global?": {"statistic": float, "df": int, "p_value": float},  # global Schoenfeld test
        "ph_check?": [{"term": str, "p_value": NUMBER_OR_NULL}],
        "ph_warning?": (str, None),
        "medians?": [{"group": str, "median": NUMBER_OR_NULL}],
        "rmst_horizon?": float,
        "rmst?": [{"group": str, "rmst": float}],
        "pairwise?": [{"group_a": str, "group_b": str, "p_adjusted": NUMBER_OR_NULL}],
    },
    "clinical?": [{"variable": str, "test": str, "effect_size": NUMBER_OR_NULL, "effect_size_name": str,
                   "p_value": NUMBER_OR_NULL, "p_adjusted": NUMBER_OR_NULL, "dropped?": int}],
    "clinical_summary?": {  # the table of clinical_summary.tsv; one text key per group holds the cell
        "groups": [str],
        "rows": [{"variable": str, "level": str, "test": str, "p_adjusted": NUMBER_OR_NULL}],
    },
    "markers?": [{  # in the order of the npz arrays markers_{i}_*
        "modality": str,
        "test?": str,
        "rows": [{"subtype": str, "feature": str, "effect": float, "auc": float, "p_adjusted": NUMBER_OR_NULL}],
    }],
    "enrichment?": [{**_GENE_SET_ROW, "overlap": int}],
    "enrichment_summary?": {"rank_test_rows?": [{**_GENE_SET_ROW, "auc": float}]},
    "not_run?": dict,  # section name or markers/<modality> -> "not run: <reason>"
    "parameters?": dict,  # the settings used, nested by workflow section (the methods paragraph reads them)
}

#: The keys of manifest.json that the reproducibility section reads.
MANIFEST: dict[str, Any] = {
    "command?": [str],  # argv words that rerun the analysis
    "created?": str,
    "strataweave_version?": str,
    "python?": str,
    "platform?": str,
    "packages?": dict,
    "seed?": int,
    "workflow?": dict,  # {path, sha256, text}
    "inputs?": dict,  # path -> sha256
    "stages?": dict,  # stage -> {seconds, key}
}

#: The arrays of stages/figure_data.npz that the report needs: name -> (dtype kind, the results.json
#: section that calls for it, None: always). n patients, M modalities, c <= 600 kept consensus rows.
ARRAYS: dict[str, tuple[str, str | None]] = {
    "subtype_code": ("i", None),  # (n,)
    "confidence": ("f", None),  # (n,) 0..1
    "core": ("b", None),  # (n,)
    "presence": ("b", None),  # (n, M) columns in cohort.modalities order
    "embedding": ("f", "graph"),  # (n, 2) spectral embedding of the fused graph
    "consensus_k{k}": ("f", "selection"),  # (c, c) ordered by subtype at k, for each k of selection.counts
    "consensus_k{k}_codes": ("i", "selection"),  # (c,) non-decreasing
    "km_{g}_time": ("f", "survival"),  # Kaplan-Meier steps of group g, from 0
    "km_{g}_survival": ("f", "survival"),
    "km_{g}_lower": ("f", "survival"),  # 95% band
    "km_{g}_upper": ("f", "survival"),
    "km_at_risk_time": ("f", "survival"),  # (a,)
    "km_at_risk": ("i", "survival"),  # (G, a)
    "markers_{i}_values": ("f", "markers"),  # (f, p) top markers x measured patients by subtype, rows scaled
    "markers_{i}_features": ("U", "markers"),  # (f,)
    "markers_{i}_feature_code": ("i", "markers"),  # (f,) the subtype each row marks
    "markers_{i}_patient_code": ("i", "markers"),  # (p,) non-decreasing
}
# Read when present, never required: patient_ids (n,), only with report.show_patient_ids;
# modality_{m}_map (p_m, 2), _map_codes (p_m,), _map_variance (2,): a modality's first two principal
# components; modality_separation (M, K): mean silhouette per subtype and modality; factor_contribution
# (M, r), factor_top_share / _top_feature / _top_modality (r, t), factor_subtype_mean (K, r); and per
# marker block volcano_{i}_difference / _p / _significant (K, F), volcano_{i}_features (F,).

_KINDS = {str: "a string", int: "an integer", float: "a number", bool: "true or false", dict: "an object"}


def _expected(spec: Any) -> str:
    if isinstance(spec, tuple):
        return f"{_expected(spec[0])} or null"
    if isinstance(spec, list):
        return "a list"
    return "an object" if isinstance(spec, dict) else _KINDS[spec]


def _fits(value: Any, kind: type) -> bool:
    if kind in (int, float):
        return isinstance(value, Integral if kind is int else Real) and not isinstance(value, bool)
    return isinstance(value, kind)


def _check(value: Any, spec: Any, path: str, source: str) -> None:
    if isinstance(spec, tuple) and value is None:
        return
    spec = spec[0] if isinstance(spec, tuple) else spec
    where = f"{source}: key '{path}'"
    if value is None:
        raise InputError(f"{where} is null; expected {_expected(spec)}")
    if isinstance(spec, list):
        if not isinstance(value, list):
            raise InputError(f"{where} is {type(value).__name__}; expected a list")
        for position, item in enumerate(value):
            _check(item, spec[0], f"{path}[{position}]", source)
    elif isinstance(spec, dict):
        if not isinstance(value, dict):
            raise InputError(f"{where} is {type(value).__name__}; expected an object")
        if str in spec:
            for name, item in value.items():
                _check(item, spec[str], f"{path}.{name}", source)
        else:
            _check_keys(value, spec, f"{path}.", source)
    elif not _fits(value, spec):
        raise InputError(f"{where} is {value!r:.60}; expected {_KINDS[spec]}")


def _check_keys(document: Mapping[str, Any], spec: Mapping[str, Any], prefix: str, source: str) -> None:
    for key, item in spec.items():
        name = key.removesuffix("?")
        if name in document:
            _check(document[name], item, prefix + name, source)
        elif name == key:
            raise InputError(f"{source}: key '{prefix}{name}' is missing; expected {_expected(item)}")


def _check_lengths(results: Mapping[str, Any], source: str) -> None:
    count = results["subtype_count"]
    for key in ("labels", "sizes"):
        found = len(results["subtypes"][key])
        if found != count:
            raise InputError(f"{source}: key 'subtypes.{key}' has {found} entries; expected subtype_count = {count}")
    selection = results.get("selection")
    if selection is not None:
        for name, values in selection["criteria"].items():
            if len(values) != len(selection["counts"]):
                raise InputError(f"{source}: key 'selection.criteria.{name}' has {len(values)} values; "
                                 f"expected one per count ({len(selection['counts'])})")


def _check_document(document: Any, spec: Mapping[str, Any], source: str) -> None:
    if not isinstance(document, dict):
        raise InputError(f"{source}: top level is {type(document).__name__}; expected an object")
    _check_keys(document, spec, "", source)


def check_results(results: Mapping[str, Any], source: str = RESULTS_FILE) -> None:
    """Raise InputError naming the first key of `results` that breaks :data:`RESULTS`."""
    _check_document(results, RESULTS, source)
    _check_lengths(results, source)


def check_manifest(manifest: Mapping[str, Any], source: str = MANIFEST_FILE) -> None:
    """Raise InputError naming the first key of `manifest` whose value breaks :data:`MANIFEST`."""
    _check_document(manifest, MANIFEST, source)


def survival_groups(results: Mapping[str, Any]) -> list[str]:
    """Names of the survival groups: survival.groups, else the subtype labels."""
    return list(results["survival"].get("groups") or results["subtypes"]["labels"])


#: What each placeholder of an ARRAYS name runs over.
_PLACEHOLDERS = {
    "k": lambda results: results["selection"]["counts"],
    "g": lambda results: range(len(survival_groups(results))),
    "i": lambda results: range(len(results["markers"])),
}


def expected_arrays(results: Mapping[str, Any]) -> list[tuple[str, str]]:
    """The concrete npz array names (placeholders expanded) that `results` calls for, with their dtype kind."""
    names = []
    for template, (kind, section) in ARRAYS.items():
        if section is not None and section not in results:
            continue
        placeholder = re.search(r"\{(\w)\}", template)
        if placeholder is None:
            names.append((template, kind))
        else:
            letter = placeholder[1]
            names += [(template.format(**{letter: value}), kind) for value in _PLACEHOLDERS[letter](results)]
    return names


def _check_shapes(arrays: Mapping[str, np.ndarray], results: Mapping[str, Any], source: str) -> None:
    n = arrays["subtype_code"].shape[0]
    wanted = {"confidence": (n,), "core": (n,), "presence": (n, len(results["cohort"]["modalities"])),
              "embedding": (n, 2), "patient_ids": (n,)}
    if "survival" in results:
        wanted["km_at_risk"] = (len(survival_groups(results)), arrays["km_at_risk_time"].shape[0])
    for name, shape in wanted.items():
        if name in arrays and arrays[name].shape != shape:
            raise InputError(f"{source}: array '{name}' has shape {arrays[name].shape}; expected {shape}")
    codes = arrays["subtype_code"]
    if codes.size and (codes.min() < 0 or codes.max() >= results["subtype_count"]):
        raise InputError(f"{source}: array 'subtype_code' holds codes {codes.min()}..{codes.max()}; "
                         f"expected 0..{results['subtype_count'] - 1}")


def check_figure_data(arrays: Mapping[str, np.ndarray], results: Mapping[str, Any], source: str = FIGURE_DATA_FILE) -> None:
    """Raise InputError naming the first array that `results` calls for and `arrays` lacks or mis-types."""
    for name, kind in expected_arrays(results):
        if name not in arrays:
            raise InputError(f"{source}: array '{name}' is missing; expected dtype kind '{kind}'")
        if arrays[name].dtype.kind not in ("iu" if kind == "i" else kind):
            raise InputError(f"{source}: array '{name}' has dtype {arrays[name].dtype}; expected kind '{kind}'")
    _check_shapes(arrays, results, source)
