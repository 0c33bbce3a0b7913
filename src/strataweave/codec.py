"""Lossless conversion of nested results to JSON plus named numpy arrays, without pickle.

A result is any nesting of dicts, lists, tuples, scalars, strings, None, numpy arrays,
scipy sparse matrices and pandas Index / Series / DataFrame objects. `encode` splits it
into a JSON-ready tree and a dict of arrays for an `.npz` file; `decode` rebuilds an equal
object (same dtypes, same labels) so that tables written from a stored result are byte for
byte those written from a fresh one. Object arrays are never stored: text becomes
fixed-width unicode with a missing-value mask. `prefixed` / `unprefixed` keep the arrays of
several parts apart in one `.npz`; `CodecState` gives a dataclass of such values its
`to_state` / `from_state`. Shared by every layer (the stage cache, saved models, the sweep's
`to_state`).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import pandas as pd
import scipy.sparse as sp


def prefixed(prefix: str, arrays: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    """`arrays` under names starting with `prefix`."""
    return {f"{prefix}{name}": np.asarray(value) for name, value in arrays.items()}


def unprefixed(prefix: str, arrays: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    """The arrays whose names start with `prefix`, without it (the inverse of `prefixed`)."""
    return {name[len(prefix):]: value for name, value in arrays.items() if name.startswith(prefix)}


class _Encoder:
    def __init__(self) -> None:
        self.arrays: dict[str, np.ndarray] = {}

    def array(self, values: np.ndarray) -> dict:
        name = f"a{len(self.arrays)}"
        if values.dtype == object:
            return self.text_array(values)
        self.arrays[name] = np.ascontiguousarray(values)
        return {"$array": name}

    def text_array(self, values: np.ndarray) -> dict:
        """Object array of str / None / NaN / bool as unicode (or bool) plus a missing mask."""
        flat = values.ravel()
        missing = pd.isna(flat)
        present = flat[~missing]
        if all(isinstance(v, (bool, np.bool_)) for v in present):
            filled = np.where(missing, False, flat).astype(bool)
        elif all(isinstance(v, str) for v in present):
            filled = np.where(missing, "", flat).astype(str)
        else:
            raise TypeError(f"cannot store an object array holding {type(present[0]).__name__} values")
        name = f"a{len(self.arrays)}"
        self.arrays[name] = filled.reshape(values.shape)
        mask_name = f"a{len(self.arrays)}"
        self.arrays[mask_name] = missing.reshape(values.shape)
        return {"$objects": name, "missing": mask_name}

    def index(self, index: pd.Index) -> dict:
        return {"$index": self.array(index.to_numpy()), "name": self.value(index.name)}

    def frame(self, frame: pd.DataFrame) -> dict:
        columns = self.index(frame.columns)
        index = self.index(frame.index)
        dtypes = frame.dtypes.unique()
        if frame.shape[1] > 0 and len(dtypes) == 1 and isinstance(dtypes[0], np.dtype) and dtypes[0] != object:
            return {"$frame": "block", "index": index, "columns": columns, "values": self.array(frame.to_numpy())}
        return {
            "$frame": "columns",
            "index": index,
            "columns": columns,
            "values": [self.column(frame.iloc[:, i]) for i in range(frame.shape[1])],
        }

    def column(self, series: pd.Series) -> dict:
        if isinstance(series.dtype, pd.CategoricalDtype):
            return {
                "$category": self.array(series.cat.codes.to_numpy()),
                "categories": self.index(series.cat.categories),
                "ordered": bool(series.cat.ordered),
            }
        if not isinstance(series.dtype, np.dtype):
            raise TypeError(f"cannot store a column of dtype {series.dtype}")
        return self.array(series.to_numpy())

    def value(self, obj: object) -> object:
        if obj is None or isinstance(obj, (bool, str)):
            return obj
        if isinstance(obj, (int, np.integer)) and not isinstance(obj, np.bool_):
            return int(obj)
        if isinstance(obj, np.bool_):
            return bool(obj)
        if isinstance(obj, (float, np.floating)):
            return {"$float": repr(float(obj))} if not np.isfinite(obj) else float(obj)
        if isinstance(obj, Path):
            return str(obj)
        if isinstance(obj, np.ndarray):
            return self.array(obj)
        if sp.issparse(obj):
            csr = sp.csr_matrix(obj)
            return {
                "$sparse": [self.array(csr.data), self.array(csr.indices), self.array(csr.indptr)],
                "shape": list(csr.shape),
            }
        if isinstance(obj, pd.DataFrame):
            return self.frame(obj)
        if isinstance(obj, pd.Series):
            return {"$series": self.column(obj), "index": self.index(obj.index), "name": self.value(obj.name)}
        if isinstance(obj, pd.Index):
            return self.index(obj)
        if isinstance(obj, dict):
            if all(isinstance(k, str) and not k.startswith("$") for k in obj):
                return {k: self.value(v) for k, v in obj.items()}
            return {"$pairs": [[self.value(k), self.value(v)] for k, v in obj.items()]}
        if isinstance(obj, tuple):
            return {"$tuple": [self.value(v) for v in obj]}
        if isinstance(obj, list):
            return [self.value(v) for v in obj]
        raise TypeError(f"cannot store a {type(obj).__name__} in the stage cache")


def encode(obj: object) -> tuple[object, dict[str, np.ndarray]]:
    """Split `obj` into a JSON-ready tree and the arrays it refers to."""
    encoder = _Encoder()
    tree = encoder.value(obj)
    return tree, encoder.arrays


def _array(ref: dict, arrays) -> np.ndarray:
    if "$objects" in ref:
        values = arrays[ref["$objects"]].astype(object)
        values[arrays[ref["missing"]]] = None
        return values
    return arrays[ref["$array"]]


def _index(ref: dict, arrays) -> pd.Index:
    return pd.Index(_array(ref["$index"], arrays), name=decode(ref["name"], arrays))


def _column(ref: dict, arrays) -> object:
    if "$category" in ref:
        categories = _index(ref["categories"], arrays)
        dtype = pd.CategoricalDtype(categories, ordered=ref["ordered"])
        return pd.Categorical.from_codes(_array(ref["$category"], arrays), dtype=dtype)
    return _array(ref, arrays)


def _frame(tree: dict, arrays) -> pd.DataFrame:
    index = _index(tree["index"], arrays)
    columns = _index(tree["columns"], arrays)
    if tree["$frame"] == "block":
        return pd.DataFrame(_array(tree["values"], arrays), index=index, columns=columns)
    data = {i: _column(ref, arrays) for i, ref in enumerate(tree["values"])}
    frame = pd.DataFrame(data, index=index)
    frame.columns = columns
    return frame


def decode(tree: object, arrays) -> object:
    """Rebuild the object that `encode` split into `tree` and `arrays`."""
    if isinstance(tree, list):
        return [decode(v, arrays) for v in tree]
    if not isinstance(tree, dict):
        return tree
    if "$float" in tree:
        return float(tree["$float"])
    if "$array" in tree or "$objects" in tree:
        return _array(tree, arrays)
    if "$sparse" in tree:
        data, indices, indptr = (_array(ref, arrays) for ref in tree["$sparse"])
        return sp.csr_matrix((data, indices, indptr), shape=tuple(tree["shape"]))
    if "$frame" in tree:
        return _frame(tree, arrays)
    if "$series" in tree:
        return pd.Series(
            _column(tree["$series"], arrays), index=_index(tree["index"], arrays), name=decode(tree["name"], arrays)
        )
    if "$index" in tree:
        return _index(tree, arrays)
    if "$pairs" in tree:
        return {decode(k, arrays): decode(v, arrays) for k, v in tree["$pairs"]}
    if "$tuple" in tree:
        return tuple(decode(v, arrays) for v in tree["$tuple"])
    return {k: decode(v, arrays) for k, v in tree.items()}


class CodecState:
    """`to_state` / `from_state` for a dataclass whose every field the codec stores."""

    def to_state(self) -> tuple[object, dict[str, np.ndarray]]:
        return encode({field.name: getattr(self, field.name) for field in dataclasses.fields(self)})

    @classmethod
    def from_state(cls, state: dict, arrays):
        return cls(**decode(state, arrays))
