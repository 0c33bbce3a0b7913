"""The methods text's account of preprocessing: each modality's transform, filters, imputation and scaling.

Read from `parameters.modalities` of results.json (the settings the run used), in the order the
steps are applied; modalities with the same settings share one sentence.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from strataweave.data.imputation import MAX_DONORS
from strataweave.report.formatting import format_value
from strataweave.report.wording import listing


Cite = Callable[..., str]  # reference keys -> the bracketed numbers of the methods text


def _transform(m: dict[str, Any], cite: Cite) -> str:
    kind = m.get("kind")
    if kind == "counts":
        cpm = f"log2 counts per million (prior count {format_value(m.get('prior_count'))})"
        if m.get("library_size", "median_ratio") != "median_ratio":
            return cpm + " of each patient's total count"
        return (f"{cpm}, each patient re-centred on its median ratio to the cohort's mean profile"
                f"{cite('anders2010')}, after profiles with no reads on more than half of the features "
                "(failed libraries) were set aside")
    if kind == "beta":
        return "M-values (log2 ratio of the beta values)" if m.get("beta_to_m") else "beta values as given"
    if kind == "abundance":
        return "log2 abundances"
    return "values as given"


def _filters(m: dict[str, Any]) -> str:
    missing = m.get("max_missing_fraction")
    parts = [f"features missing in more than {missing:.0%} of the patients" if missing is not None else "",
             f"features with variance below {format_value(m.get('min_variance'))}"
             if m.get("min_variance") is not None else ""]
    dropped = listing([p for p in parts if p]) if any(parts) else ""
    text = f"{dropped} were dropped" if dropped else ""
    top = m.get("top_features")
    if top is not None:
        rank = "median absolute deviation" if m.get("rank_by") == "mad" else "variance"
        text += (", then " if text else "") + f"the {format_value(top)} features of highest {rank} (all, where fewer) were kept"
    return text


def _imputation(m: dict[str, Any]) -> str:
    method = m.get("impute")
    if method == "median":
        return "missing values were imputed by the feature median"
    if method == "knn":
        return (f"missing values were imputed from the {format_value(m.get('impute_neighbours'))} nearest patients "
                f"(among {MAX_DONORS:,} evenly spaced ones in a modality of more patients)")
    return "missing values were not imputed"


def _scaling(m: dict[str, Any]) -> str:
    parts = ["each feature was centred and scaled to unit variance" if m.get("scale") == "zscore" else ""]
    if m.get("non_negative") == "split":
        parts.append("split into its positive and negative parts, so the factorisation sees two non-negative "
                     "columns per kept feature")
    elif m.get("non_negative") == "shift":
        parts.append("shifted to be non-negative")
    return " and ".join(p for p in parts if p)


def modality_steps(m: dict[str, Any], cite: Cite) -> str:
    """One modality's preprocessing as a clause, steps in the order they run."""
    steps = [f"transformed to {_transform(m, cite)}"]
    if m.get("quantile_normalise"):
        steps.append("quantile normalised across patients")
    steps += [_filters(m), _imputation(m), _scaling(m)]
    return "; ".join(s for s in steps if s)


def preprocessing_sentences(modalities: list[dict[str, Any]], cite: Cite) -> list[str]:
    """'<names>: <steps>.' for each distinct preprocessing, modalities with equal steps together."""
    by_steps: dict[str, list[str]] = {}
    for m in modalities:
        by_steps.setdefault(modality_steps(m, cite), []).append(str(m.get("name")))
    return [f"Preprocessing of {listing(names)}: {steps}." for steps, names in by_steps.items()]
