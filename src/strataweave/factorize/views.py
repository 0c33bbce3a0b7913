"""Check the caller's modalities and turn them into NaN-free blocks for the updates.

A patient missing a modality (an all-NaN row, or a False in a per-patient mask) is simply
left out of that modality's block: the block keeps only the rows of the patients it has and
their positions, which acts as a row weight of zero without a dense masked copy of X.
Single missing entries need an entry mask; only then is a 0/1 mask kept beside the block.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np
import pandas as pd

from strataweave.errors import InputError

NONNEGATIVE_HINT = "make it non-negative first, e.g. Preprocessor(..., non_negative='shift' or 'split')"


@dataclass(frozen=True)
class ViewBlock:
    """One modality as the updates see it: observed rows only, missing entries set to 0."""

    name: str
    data: np.ndarray
    rows: np.ndarray | None
    entry_mask: np.ndarray | None
    weight: float
    squared_norm: float

    def restrict(self, W: np.ndarray) -> np.ndarray:
        """The rows of the patient factor that belong to this block's patients."""
        return W if self.rows is None else W[self.rows]

    def scatter_add(self, target: np.ndarray, values: np.ndarray) -> None:
        """Add per-patient `values` of this block into the full patient array `target`."""
        if self.rows is None:
            target += values
        else:
            target[self.rows] += values

    def masked(self, product: np.ndarray) -> np.ndarray:
        """`product` with the missing entries zeroed (no-op without an entry mask)."""
        return product if self.entry_mask is None else product * self.entry_mask

    def right_model_term(self, W_rows: np.ndarray, H: np.ndarray, HHt: np.ndarray) -> np.ndarray:
        """(M o (W H)) H^T; equals W (H H^T) when nothing is masked (the cheap path)."""
        if self.entry_mask is None:
            return W_rows @ HHt
        return self.masked(W_rows @ H) @ H.T

    def left_model_term(self, W_rows: np.ndarray, H: np.ndarray, WtW: np.ndarray) -> np.ndarray:
        """W^T (M o (W H)); equals (W^T W) H when nothing is masked."""
        if self.entry_mask is None:
            return WtW @ H
        return W_rows.T @ self.masked(W_rows @ H)

    def squared_error(self, W_rows: np.ndarray, H: np.ndarray, WtX: np.ndarray, WtW: np.ndarray) -> float:
        """||M o (X - W H)||_F^2, by the expansion ||X||^2 - 2<W^T X, H> + <W^T W, H H^T> if unmasked."""
        if self.entry_mask is None:
            H64 = H.astype(np.float64)
            cross = float(np.vdot(WtX.astype(np.float64), H64))
            model = float(np.vdot(WtW.astype(np.float64), H64 @ H64.T))
            return max(self.squared_norm - 2.0 * cross + model, 0.0)
        return _squared_norm(self.masked(self.data - W_rows @ H))


@dataclass(frozen=True)
class PreparedViews:
    """The checked blocks plus what the estimator remembers about the input."""

    blocks: list[ViewBlock]
    n_patients: int
    patients: pd.Index | None
    feature_names: list[list[str] | None]


def _as_named_list(views) -> tuple[list[str], list]:
    """Names and tables of the views; one 2-D array or DataFrame is a single view."""
    if isinstance(views, pd.DataFrame) or (isinstance(views, np.ndarray) and views.ndim == 2):
        return ["view 0"], [views]
    if isinstance(views, Mapping):
        return [str(name) for name in views], list(views.values())
    if isinstance(views, (list, tuple)):
        names = [getattr(v, "name", None) or f"view {i}" for i, v in enumerate(views)]
        return [str(n) for n in names], list(views)
    raise InputError(f"views: found {type(views).__name__}; expected a list or dict of 2-D arrays or DataFrames")


def _row_label(patients: pd.Index | None, row: int) -> str:
    return f"patient {patients[row]!r}" if patients is not None else f"row {row}"


def _patient_index(names: list[str], frames: list) -> pd.Index | None:
    indexed = [(n, v.index) for n, v in zip(names, frames) if isinstance(v, pd.DataFrame)]
    if not indexed:
        return None
    first_name, first = indexed[0]
    for name, index in indexed[1:]:
        if not index.equals(first):
            raise InputError(
                f"view {name!r}: patient index differs from view {first_name!r}; "
                "expected every view aligned on one patient index (Cohort.aligned_views)"
            )
    return first


def _observed_mask(name: str, values: np.ndarray, mask, patients) -> np.ndarray | None:
    """Bool entries observed (None = all), from an explicit mask or from all-NaN rows."""
    n, m = values.shape
    nan = np.isnan(values)
    if mask is None:
        partial = nan.any(axis=1) & ~nan.all(axis=1)
        if partial.any():
            row = int(np.flatnonzero(partial)[0])
            raise InputError(
                f"view {name!r}, {_row_label(patients, row)}: found {int(nan[row].sum())} NaN of {m} values; "
                "expected a full row or an all-NaN row (missing modality), or a mask marking missing entries"
            )
        return ~nan if nan.any() else None
    mask = np.asarray(mask)
    if mask.dtype != bool:
        raise InputError(f"mask of view {name!r}: found dtype {mask.dtype}; expected bool (True = observed)")
    if mask.shape == (n,):
        mask = np.broadcast_to(mask[:, None], (n, m))
    elif mask.shape != (n, m):
        raise InputError(f"mask of view {name!r}: found shape {mask.shape}; expected ({n},) or ({n}, {m})")
    unmarked = nan & mask
    if unmarked.any():
        row = int(np.flatnonzero(unmarked.any(axis=1))[0])
        raise InputError(
            f"view {name!r}, {_row_label(patients, row)}: found NaN where the mask says observed; "
            "expected a number, or False in the mask"
        )
    return None if mask.all() else mask


def _squared_norm(data: np.ndarray) -> float:
    """||X||_F^2 accumulated in float64 whatever the storage type."""
    return float(np.einsum("ij,ij->", data, data, dtype=np.float64))


def _block(name, values, observed, weight, dtype) -> ViewBlock:
    """Keep the observed rows; keep an entry mask only where a row is partly observed."""
    if observed is None:
        data = np.ascontiguousarray(values, dtype=dtype)
        return ViewBlock(name, data, None, None, weight, _squared_norm(data))
    present = observed.any(axis=1)
    rows = np.flatnonzero(present)
    kept = observed[rows]
    data = np.where(kept, values[rows], 0.0).astype(dtype)
    entry_mask = None if kept.all() else kept.astype(dtype)
    return ViewBlock(name, data, rows, entry_mask, weight, _squared_norm(data))


def _check_values(name: str, values: np.ndarray, patients) -> None:
    with np.errstate(invalid="ignore"):
        negative = int(np.sum(values < 0))
    if negative:
        raise InputError(f"view {name!r}: found {negative} negative entries; expected non-negative values ({NONNEGATIVE_HINT})")
    infinite = np.isinf(values)
    if infinite.any():
        row = int(np.flatnonzero(infinite.any(axis=1))[0])
        raise InputError(f"view {name!r}, {_row_label(patients, row)}: found an infinite value; expected finite numbers")


def _numeric(name: str, frame) -> np.ndarray:
    """The view as a float array, without a copy when it already is one."""
    values = np.asarray(frame)
    if values.dtype.kind == "f":
        return values
    try:
        return values.astype(np.float64)
    except (TypeError, ValueError):
        raise InputError(f"view {name!r}: found non-numeric values; expected numbers") from None


def _default_weight(name: str, squared_norm: float) -> float:
    if squared_norm <= 0:
        raise InputError(f"view {name!r}: found only zeros; expected some positive values")
    return 1.0 / squared_norm


def default_modality_weights(views: Sequence | Mapping) -> list[float]:
    """The balance alpha_v = 1 / ||X_v||_F^2 (observed entries) that JointNMF uses unless given weights.

    Callers that weight modalities relative to this balance multiply it, so the formula
    lives here only.
    """
    names, frames = _as_named_list(views)
    return [
        _default_weight(name, float(np.nansum(np.square(_numeric(name, frame)))))
        for name, frame in zip(names, frames)
    ]


def relative_modality_weights(views: Sequence | Mapping, relative: Sequence[float]) -> list[float] | None:
    """Modality weights that scale the default balance by `relative` (None when all are 1: the default)."""
    if all(w == 1.0 for w in relative):
        return None
    return [w * a for w, a in zip(relative, default_modality_weights(views))]


def prepare_views(
    views: Sequence | Mapping,
    *,
    mask: Sequence | None = None,
    weights: Sequence[float] | None = None,
    n_components: int | None = None,
    dtype=np.float64,
    expected_features: Sequence[int] | None = None,
    feature_names: Sequence[list[str] | None] | None = None,
) -> PreparedViews:
    """Validate `views` (patients in rows, all-NaN rows for a missing modality) into blocks.

    `weights` are the modality weights alpha_v (default 1 / ||X_v||_F^2 over observed entries);
    `expected_features`/`feature_names` pin the columns a fitted model was trained on.
    """
    names, frames = _as_named_list(views)
    if not frames:
        raise InputError("views: found none; expected at least one modality")
    patients = _patient_index(names, frames)
    masks = list(mask) if mask is not None else [None] * len(frames)
    if len(masks) != len(frames):
        raise InputError(f"mask: found {len(masks)} entries; expected {len(frames)}, one per view")
    if weights is not None and len(weights) != len(frames):
        raise InputError(f"modality weights: found {len(weights)}; expected {len(frames)}, one per view")
    blocks, columns, n_patients, any_observed = [], [], None, None
    for i, (name, frame) in enumerate(zip(names, frames)):
        if isinstance(frame, pd.DataFrame) and feature_names is not None and feature_names[i] is not None:
            missing = pd.Index(feature_names[i]).difference(frame.columns)
            if len(missing):
                raise InputError(f"view {name!r}: column {missing[0]!r} is missing; expected the training features")
            frame = frame[list(feature_names[i])]
        columns.append([str(c) for c in frame.columns] if isinstance(frame, pd.DataFrame) else None)
        values = _numeric(name, frame)
        if values.ndim != 2:
            raise InputError(f"view {name!r}: found {values.ndim} dimensions; expected 2 (patients x features)")
        if n_patients is None:
            n_patients, any_observed = values.shape[0], np.zeros(values.shape[0], dtype=bool)
        elif values.shape[0] != n_patients:
            raise InputError(f"view {name!r}: found {values.shape[0]} patient rows; expected {n_patients} like the first view")
        if expected_features is not None and values.shape[1] != expected_features[i]:
            raise InputError(f"view {name!r}: found {values.shape[1]} features; expected {expected_features[i]}")
        _check_values(name, values, patients)
        observed = _observed_mask(name, values, masks[i], patients)
        any_observed |= True if observed is None else observed.any(axis=1)
        weight = None if weights is None else float(weights[i])
        block = _block(name, values, observed, 1.0 if weight is None else weight, dtype)
        if weight is None:
            block = ViewBlock(**{**block.__dict__, "weight": _default_weight(name, block.squared_norm)})
        blocks.append(block)
    if not any_observed.all():
        empty = np.flatnonzero(~any_observed)
        raise InputError(
            f"{_row_label(patients, int(empty[0]))}: found no data in any view ({len(empty)} such patients); "
            "expected each patient observed in at least one modality"
        )
    if n_components is not None:
        # The rank is bounded by the concatenation (its SVD starts the fit), not by the
        # narrowest view: a view of 6 features may have loadings on 10 components.
        limit = min(n_patients - 1, sum(b.data.shape[1] for b in blocks))
        if not 1 <= n_components <= limit:
            raise InputError(
                f"n_components: found {n_components}; expected 1 <= rank <= {limit}, "
                "below the patient count and at most the features of all views together"
            )
    return PreparedViews(blocks, n_patients, patients, columns)
