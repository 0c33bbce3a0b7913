"""AnnData (.h5ad) and MuData (.h5mu) files: omics layers and clinical tables in, subtypes back into `obs`.

In a `.h5mu` each modality (`mod[name]`) is one omics layer, patients in `obs` and features
in `var`, and the file's own `obs` is the clinical table; an `.h5ad` holds one layer in `X`
and its `obs`. The `anndata` and `mudata` packages are an optional extra
(`pip install "strataweave[annotated]"`).
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd
import scipy.sparse as sp

from strataweave.caution import CAUTION
from strataweave.errors import InputError

SUFFIXES = (".h5ad", ".h5mu")
CAUTION_KEY = "strataweave_caution"


def is_annotated(path) -> bool:
    """Whether `path` names an AnnData or MuData file."""
    return Path(path).suffix.lower() in SUFFIXES


def _package(name: str, path: Path):
    try:
        return __import__(name)
    except ImportError:
        raise InputError(
            f"{path}: reading {path.suffix} files needs the '{name}' package, expected `pip install \"strataweave[annotated]\"`"
        ) from None


def _read(path) -> object:
    """The AnnData or MuData object in `path`."""
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: file not found, expected an {' or '.join(SUFFIXES)} file")
    reader = _package("mudata", path).read_h5mu if path.suffix.lower() == ".h5mu" else _package("anndata", path).read_h5ad
    try:
        return reader(path)
    except (OSError, KeyError, ValueError) as problem:
        raise InputError(f"{path}: not a readable {path.suffix} file ({problem})") from None


def _layer(data, path: Path, name: str | None):
    """The AnnData of one omics layer: `mod[name]` of a MuData, the AnnData itself otherwise."""
    if not hasattr(data, "mod"):
        return data
    if name not in data.mod:
        raise InputError(f"{path}: modality {name!r}: not in the file, expected one of {', '.join(data.mod)}")
    return data.mod[name]


def read_annotated_matrix(path, name: str | None = None) -> pd.DataFrame:
    """Patients x features (float64) of an .h5ad's `X`, or of modality `name` of an .h5mu."""
    path = Path(path)
    layer = _layer(_read(path), path, name)
    values = layer.X.toarray() if sp.issparse(layer.X) else np.asarray(layer.X)
    return pd.DataFrame(values.astype(np.float64), index=pd.Index(layer.obs_names.astype(str), dtype=object),
                        columns=pd.Index(layer.var_names.astype(str), dtype=object))


def read_annotated_obs(path) -> pd.DataFrame:
    """The clinical table of an .h5mu (its `obs`) or .h5ad, indexed by patient ID.

    Numeric columns become float64, the others text (missing cells None), as from a table file.
    """
    obs = _read(path).obs
    columns = {}
    for name, values in obs.items():
        if pd.api.types.is_numeric_dtype(values) and not pd.api.types.is_bool_dtype(values):
            columns[str(name)] = values.to_numpy(dtype=np.float64)
        else:
            text = values.astype(object)
            columns[str(name)] = text.where(text.notna(), None).map(lambda v: v if v is None else str(v)).to_numpy()
    return pd.DataFrame(columns, index=pd.Index(obs.index.astype(str), dtype=object, name="patient_id"))


def obs_columns(table: pd.DataFrame) -> pd.DataFrame:
    """An assignment table (subtype, confidence, score_<name>, ...) as obs columns: `subtype` and `subtype_<column>`."""
    renamed = table.rename(columns={c: c if c == "subtype" else f"subtype_{c}" for c in table.columns})
    if "subtype" in renamed:
        renamed["subtype"] = pd.Categorical(renamed["subtype"])
    return renamed


def write_annotated(source, out, table: pd.DataFrame) -> Path:
    """A copy of `source` (.h5ad or .h5mu) with `table` (indexed by patient ID) added to its `obs`.

    Patients the table lacks get missing values; the caution goes into `uns`. `source` is never
    modified; `out` is written under a temporary name and renamed into place.
    """
    source, out = Path(source), Path(out)
    if out.suffix.lower() != source.suffix.lower():
        raise InputError(f"{out}: found suffix {out.suffix!r}, expected {source.suffix!r} like {source.name}")
    if out.resolve() == source.resolve():
        raise InputError(f"{out}: is the input file, expected a new file (inputs are never modified)")
    data = _read(source)
    added = obs_columns(table).reindex(data.obs.index.astype(str))
    for column in added.columns:
        data.obs[column] = added[column].to_numpy()
    data.uns[CAUTION_KEY] = CAUTION
    out.parent.mkdir(parents=True, exist_ok=True)
    temporary = out.with_name(f".{out.name}.tmp{out.suffix}")
    try:
        data.write(temporary)
        os.replace(temporary, out)
    finally:
        temporary.unlink(missing_ok=True)
    return out
