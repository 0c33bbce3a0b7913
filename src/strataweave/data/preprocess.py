"""Preprocessor: normalise, filter, impute and scale one modality, keeping a transform log.

The log (`steps_`) holds every fitted parameter, so new patients are transformed exactly
like the training cohort, and it round-trips through JSON plus npz arrays (`to_state`,
`from_state`) without pickling.

Order: kind transform -> quantile normalisation (optional) -> missing filter ->
variance filter -> top-N features (optional) -> imputation -> scaling -> non-negativity.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd

from strataweave.data import filters, imputation, moments, normalise, scaling
from strataweave.data.positions import input_error, shown
from strataweave.data.validation import KINDS, checked_frame

STATE_FORMAT = "strataweave.preprocessor/1"
_OPTIONS_SOURCE = "preprocessing options"

Step = dict
Applier = Callable[[Step, np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]


class Preprocessor:
    """Turns one raw modality table (patients x features) into the matrix the model uses.

    kind: counts | beta | abundance | log_expression | copy_number.
    prior_count: added to counts for log2 CPM. library_size: "median_ratio" re-centres each
    patient's log2 CPM on its median ratio to the cohort's mean per feature (Anders & Huber
    2010), so a few features holding most of a patient's reads do not shift all others;
    "total" keeps the plain total count. beta_to_m: beta values become M-values
    (values clipped into [beta_floor, 1 - beta_floor] first). log_offset: added to
    abundances before log2. quantile_normalise: across patients (Bolstad et al. 2003).
    max_missing_fraction, min_variance, top_features + rank_by ("variance" | "mad"):
    feature filters. impute: "knn" (impute_neighbours nearest patients) | "median" | "none".
    scale: "zscore" | "none". non_negative: "shift" | "split" | "none" (for NMF).
    A feature absent from the table given to `transform` comes out as NaN.
    """

    def __init__(
        self,
        kind: str,
        *,
        prior_count: float = 0.5,
        library_size: str = "median_ratio",
        beta_to_m: bool = True,
        beta_floor: float = 1e-6,
        log_offset: float = 0.0,
        quantile_normalise: bool = False,
        max_missing_fraction: float = 0.2,
        min_variance: float = 1e-8,
        top_features: int | None = None,
        rank_by: str = "variance",
        impute: str = "knn",
        impute_neighbours: int = 10,
        scale: str = "zscore",
        non_negative: str = "none",
    ):
        self.kind = kind
        self.prior_count = prior_count
        self.library_size = library_size
        self.beta_to_m = beta_to_m
        self.beta_floor = beta_floor
        self.log_offset = log_offset
        self.quantile_normalise = quantile_normalise
        self.max_missing_fraction = max_missing_fraction
        self.min_variance = min_variance
        self.top_features = top_features
        self.rank_by = rank_by
        self.impute = impute
        self.impute_neighbours = impute_neighbours
        self.scale = scale
        self.non_negative = non_negative

    def get_params(self) -> dict:
        """The constructor parameters (JSON-safe)."""
        return {name: getattr(self, name) for name in _PARAMETER_NAMES}

    def fit(self, raw: pd.DataFrame, source: str = "input table") -> Preprocessor:
        """Fit every step on `raw` (patients x features); `raw` is not modified."""
        _check_options(self.get_params())
        frame = checked_frame(raw, source, self.kind)
        values = frame.to_numpy()
        features = np.asarray(frame.columns, dtype=str)
        self.input_features_ = features
        self.steps_ = []
        sources = features
        for fit_step in self._plan():
            step = fit_step(values, features)
            step["features_in"] = int(features.size)
            values, new_features = _APPLIERS[step["step"]](step, values, features)
            step["features_out"] = int(new_features.size)
            if new_features.size == 0:
                raise input_error(source, f"step {shown(step['step'])}", "no feature left",
                                  "at least one feature; loosen the filter options")
            sources = np.tile(features, 2) if step["step"] == "split_signs" else new_features
            features = new_features
            self.steps_.append(step)
        self.output_features_ = features
        self.output_sources_ = sources
        return self

    def transform(self, raw: pd.DataFrame, source: str = "input table") -> pd.DataFrame:
        """Apply the fitted steps to `raw`; features it lacks come out as NaN."""
        frame = checked_frame(raw, source, self.kind, allow_empty=True)
        absent = ~np.isin(self.input_features_, np.asarray(frame.columns, dtype=str))
        values = frame.reindex(columns=self.input_features_).to_numpy(dtype=np.float64)
        features = self.input_features_
        for step in self.steps_:
            values, features = _APPLIERS[step["step"]](step, values, features)
        values[:, np.isin(self.output_sources_, self.input_features_[absent])] = np.nan
        out = pd.DataFrame(values, index=frame.index, columns=pd.Index(features, name="feature"))
        out.index.name = "patient_id"
        return out

    def fit_transform(self, raw: pd.DataFrame, source: str = "input table") -> pd.DataFrame:
        return self.fit(raw, source).transform(raw, source)

    def to_state(self) -> tuple[dict, dict[str, np.ndarray]]:
        """JSON-safe description plus named arrays (npz-safe, no object dtype)."""
        arrays = {
            "input_features": self.input_features_,
            "output_features": self.output_features_,
            "output_sources": self.output_sources_,
        }
        steps = []
        for i, step in enumerate(self.steps_):
            plain = {key: value for key, value in step.items() if not isinstance(value, np.ndarray)}
            plain["arrays"] = {}
            for key, value in step.items():
                if isinstance(value, np.ndarray):
                    plain["arrays"][key] = f"step{i}_{key}"
                    arrays[f"step{i}_{key}"] = value
            steps.append(plain)
        return {"format": STATE_FORMAT, "params": self.get_params(), "steps": steps}, arrays

    @classmethod
    def from_state(cls, state: dict, arrays: dict[str, np.ndarray]) -> Preprocessor:
        """Rebuild a fitted Preprocessor from :meth:`to_state` output."""
        try:
            if state["format"] != STATE_FORMAT:
                raise input_error("saved preprocessor", "key 'format'", shown(state["format"]), shown(STATE_FORMAT))
            params = dict(state["params"])
            _check_options(params)
            fitted = cls(params.pop("kind"), **params)
            fitted.input_features_ = np.asarray(arrays["input_features"], dtype=str)
            fitted.output_features_ = np.asarray(arrays["output_features"], dtype=str)
            fitted.output_sources_ = np.asarray(arrays["output_sources"], dtype=str)
            fitted.steps_ = [_restore_step(step, arrays) for step in state["steps"]]
        except (KeyError, TypeError) as err:
            raise input_error("saved preprocessor", "state", f"a missing or malformed entry ({err})",
                              "the output of Preprocessor.to_state") from None
        return fitted

    def _plan(self) -> list[Callable[[np.ndarray, np.ndarray], Step]]:
        """The step fitters in their fixed order, skipping the optional ones not asked for."""
        plan = [self._fit_kind]
        if self.quantile_normalise:
            plan.append(_fit_quantile)
        plan += [self._fit_missing_filter, self._fit_variance_filter]
        if self.top_features is not None:
            plan.append(self._fit_top_features)
        if self.impute != "none":
            plan.append(self._fit_impute)
        if self.scale == "zscore":
            plan.append(_fit_zscore)
        if self.non_negative == "shift":
            plan.append(_fit_shift)
        elif self.non_negative == "split":
            plan.append(lambda values, features: {"step": "split_signs"})
        return plan

    def _fit_kind(self, values, features) -> Step:
        if self.kind == "counts":
            step = {"step": "kind_transform", "kind": self.kind, "method": "log2_cpm", "prior_count": self.prior_count,
                    "library_size": self.library_size}
            if self.library_size == "median_ratio":
                step["reference"] = moments.observed_moments(normalise.log2_cpm(values, self.prior_count), ddof=0)[1]
            return step
        if self.kind == "beta" and self.beta_to_m:
            return {"step": "kind_transform", "kind": self.kind, "method": "m_values", "beta_floor": self.beta_floor}
        if self.kind == "abundance":
            return {"step": "kind_transform", "kind": self.kind, "method": "log2", "log_offset": self.log_offset}
        return {"step": "kind_transform", "kind": self.kind, "method": "none"}

    def _fit_missing_filter(self, values, features) -> Step:
        keep = filters.within_missing_limit(values, self.max_missing_fraction)
        return {"step": "missing_filter", "max_missing_fraction": self.max_missing_fraction, "kept": features[keep]}

    def _fit_variance_filter(self, values, features) -> Step:
        keep = filters.above_min_variance(values, self.min_variance)
        return {"step": "variance_filter", "min_variance": self.min_variance, "kept": features[keep]}

    def _fit_top_features(self, values, features) -> Step:
        keep = filters.top_ranked(values, int(self.top_features), self.rank_by)
        return {"step": "top_features", "top_features": self.top_features, "rank_by": self.rank_by,
                "kept": features[keep]}

    def _fit_impute(self, values, features) -> Step:
        if self.impute == "knn":
            donors = values[imputation.donor_rows(values.shape[0])]
            return {"step": "impute", "method": "knn", "neighbours": self.impute_neighbours, "reference": donors}
        return {"step": "impute", "method": "median", "medians": moments.feature_median(values)}


def _fit_quantile(values, features) -> Step:
    return {"step": "quantile_normalise", "reference": normalise.quantile_reference(values)}


def _fit_zscore(values, features) -> Step:
    mean, std = scaling.feature_mean_std(values)
    return {"step": "zscore", "mean": mean, "std": std}


def _fit_shift(values, features) -> Step:
    return {"step": "shift", "minimum": moments.feature_minimum(values)}


def _apply_kind(step, values, features):
    method = step["method"]
    if method == "log2_cpm":
        log_values = normalise.log2_cpm(values, step["prior_count"])
        if step.get("library_size", "total") == "median_ratio":  # states saved before the option: total
            log_values = log_values - normalise.median_ratio_offsets(log_values, step["reference"])
        return log_values, features
    if method == "m_values":
        return normalise.m_values(values, step["beta_floor"]), features
    if method == "log2":
        return normalise.log2_abundance(values, step["log_offset"]), features
    return values.copy(), features


def _apply_selection(step, values, features):
    return values[:, pd.Index(features).get_indexer(step["kept"])], step["kept"]


def _apply_impute(step, values, features):
    if step["method"] == "knn":
        return imputation.knn_fill(values, step["reference"], step["neighbours"]), features
    return imputation.median_fill(values, step["medians"]), features


_APPLIERS: dict[str, Applier] = {
    "kind_transform": _apply_kind,
    "quantile_normalise": lambda step, values, features: (normalise.quantile_apply(values, step["reference"]), features),
    "missing_filter": _apply_selection,
    "variance_filter": _apply_selection,
    "top_features": _apply_selection,
    "impute": _apply_impute,
    "zscore": lambda step, values, features: (scaling.zscore(values, step["mean"], step["std"]), features),
    "shift": lambda step, values, features: (scaling.shift_non_negative(values, step["minimum"]), features),
    "split_signs": lambda step, values, features: (
        scaling.split_signs(values),
        np.asarray(scaling.split_names(features), dtype=str),
    ),
}

_PARAMETER_NAMES = (
    "kind", "prior_count", "library_size", "beta_to_m", "beta_floor", "log_offset", "quantile_normalise",
    "max_missing_fraction", "min_variance", "top_features", "rank_by", "impute",
    "impute_neighbours", "scale", "non_negative",
)


def _restore_step(plain: dict, arrays: dict[str, np.ndarray]) -> Step:
    step = {key: value for key, value in plain.items() if key != "arrays"}
    for key, name in plain["arrays"].items():
        array = arrays[name]
        step[key] = array.astype(str) if array.dtype.kind in "US" else array
    if step["step"] not in _APPLIERS:
        raise input_error("saved preprocessor", "key 'step'", shown(step["step"]), "one of " + ", ".join(_APPLIERS))
    return step


_CHOICES = {
    "kind": KINDS,
    "library_size": normalise.LIBRARY_SIZES,
    "rank_by": filters.RANKINGS,
    "impute": imputation.IMPUTERS,
    "scale": scaling.SCALINGS,
    "non_negative": scaling.NON_NEGATIVITY,
    "beta_to_m": (True, False),
    "quantile_normalise": (True, False),
}

# key -> (test, words for what is expected)
_RANGES = {
    "prior_count": (lambda v: v > 0, "a number > 0"),
    "beta_floor": (lambda v: 0 < v < 0.5, "a number in (0, 0.5)"),
    "log_offset": (lambda v: v >= 0, "a number >= 0"),
    "max_missing_fraction": (lambda v: 0 <= v <= 1, "a number in [0, 1]"),
    "min_variance": (lambda v: v >= 0, "a number >= 0"),
    "impute_neighbours": (lambda v: float(v).is_integer() and v >= 1, "a whole number >= 1"),
    "top_features": (lambda v: float(v).is_integer() and v >= 1, "a whole number >= 1 or nothing"),
}
_MAY_BE_NONE = ("top_features",)


def _check_options(params: dict) -> None:
    """Refuse an unknown choice or a number out of range, naming the key."""
    for key, allowed in _CHOICES.items():
        if params[key] not in allowed or isinstance(params[key], bool) != isinstance(allowed[0], bool):
            raise input_error(_OPTIONS_SOURCE, f"key {shown(key)}", shown(params[key]),
                              "one of " + ", ".join(str(a) for a in allowed))
    for key, (test, words) in _RANGES.items():
        value = params[key]
        if value is None and key in _MAY_BE_NONE:
            continue
        numeric = isinstance(value, (int, float)) and not isinstance(value, bool)
        if not numeric or not test(value):
            raise input_error(_OPTIONS_SOURCE, f"key {shown(key)}", shown(value), words)
