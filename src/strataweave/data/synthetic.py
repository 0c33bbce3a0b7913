"""An invented multi-omics cohort with planted subtypes, for the demo, the tests and the benchmarks.

The scenario is fictional: the Corrowmere Lakes Biobank, adults with a solid tumour, profiled on
four omics layers of fictional features (genes `QZG....`, CpG probes `QZM.....`, miRNAs
`qz-miR-...`, proteins `QZG...._p`). Each layer tells apart only some of the planted subtypes,
so that no single layer separates them all while all layers together do; most features are
noise; some patients miss a whole layer; survival hazards differ by subtype.
"""

from __future__ import annotations

import gzip
import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from scipy.special import expit

from strataweave.errors import InputError
from strataweave.files import atomic_write_bytes, atomic_write_text, guarded
from strataweave.seeding import child_seeds

DEFAULT_SEED = 2718
DEFAULT_PATIENTS = 400
FEATURES_IN_ROWS = "features_in_rows"
SAMPLES_IN_ROWS = "samples_in_rows"
MISSING_LAYER_FRACTION = 0.15
PLANTED_NOTE = (
    "planted subtypes: known only because these data are synthetic (invented, research use only)"
)

_MIN_PATIENTS_PER_SUBTYPE = 10
_MAX_SUBTYPES = 8
_STAGES = np.array(["I", "II", "III", "IV"])
_CENTRES = np.array(["northgate", "riverside", "hillcrest"])


@dataclass(frozen=True)
class LayerRecipe:
    """How one omics layer is simulated and written.

    `merged_pairs` lists pairs of subtype indices (taken modulo the subtype count) that this
    layer cannot tell apart; `effect` is the marker shift on the layer's log scale (log2 for
    counts and abundance, M-value units for beta) and `noise` the patient-to-patient spread.
    """

    name: str
    kind: str
    file_name: str
    orientation: str
    n_features: int
    markers_per_group: int
    merged_pairs: tuple[tuple[int, int], ...]
    effect: float
    noise: float
    purity_features: float


RECIPES = (
    LayerRecipe("rna", "counts", "rna_counts.tsv.gz", FEATURES_IN_ROWS, 1000, 30, ((0, 1),), 1.4, 0.4, 0.10),
    LayerRecipe("methylation", "beta", "methylation_beta.tsv.gz", FEATURES_IN_ROWS, 600, 25, ((1, 2),), 1.4, 0.6, 0.10),
    LayerRecipe("mirna", "counts", "mirna_counts.tsv", SAMPLES_IN_ROWS, 250, 12, ((0, 2), (1, 3)), 1.1, 0.45, 0.0),
    LayerRecipe("protein", "abundance", "protein_abundance.tsv", SAMPLES_IN_ROWS, 120, 8, ((0, 3),), 1.0, 0.4, 0.10),
)


@dataclass
class SyntheticCohort:
    """The invented cohort in memory.

    `tables` hold each layer in FILE orientation (see `orientations`); `clinical` is indexed by
    patient_id; `planted` is the planted subtype of every patient; `gene_sets` maps a set name
    to (description, members); `enriched_sets` maps the sets enriched in planted markers to the
    subtypes those markers mark; `markers` lists every planted marker feature.
    """

    seed: int
    tables: dict[str, pd.DataFrame]
    orientations: dict[str, str]
    kinds: dict[str, str]
    file_names: dict[str, str]
    clinical: pd.DataFrame
    planted: pd.Series
    gene_sets: dict[str, tuple[str, list[str]]]
    enriched_sets: dict[str, tuple[str, ...]]
    markers: pd.DataFrame

    def patients_by_features(self, name: str) -> pd.DataFrame:
        """Layer `name` as patients x features float64 (the in-program orientation), raw values."""
        table = self.tables[name]
        frame = table.T if self.orientations[name] == FEATURES_IN_ROWS else table
        return frame.astype(np.float64)

    def _patients_in(self, name: str) -> pd.Index:
        table = self.tables[name]
        return table.columns if self.orientations[name] == FEATURES_IN_ROWS else table.index

    def presence(self) -> pd.DataFrame:
        """Boolean patients x layers table: which patient has which layer."""
        return pd.DataFrame(
            {name: self.clinical.index.isin(self._patients_in(name)) for name in self.tables},
            index=self.clinical.index,
        )


def make_synthetic_cohort(
    n_patients: int = DEFAULT_PATIENTS, n_subtypes: int = 4, seed: int = DEFAULT_SEED
) -> SyntheticCohort:
    """Simulate the cohort: deterministic for a given (n_patients, n_subtypes, seed)."""
    _check_size(n_patients, n_subtypes)
    seeds = child_seeds(seed, 4 + len(RECIPES))
    rng_groups, rng_clinical, rng_missing, rng_sets = (np.random.default_rng(s) for s in seeds[:4])

    patients = _patient_ids(n_patients)
    subtype = rng_groups.permutation(np.repeat(np.arange(n_subtypes), _subtype_sizes(n_patients, n_subtypes)))
    strength = np.clip(rng_groups.normal(1.0, 0.25, n_patients), 0.4, 1.6)
    purity = rng_groups.beta(7.0, 3.0, n_patients)
    purity = (purity - purity.mean()) / purity.std()
    missing_layer = _missing_layers(rng_missing, n_patients, len(RECIPES))

    tables, marker_tables = {}, []
    for layer_index, (recipe, layer_seed) in enumerate(zip(RECIPES, seeds[4:], strict=True)):
        rng = np.random.default_rng(layer_seed)
        values, names, layer_markers = _simulate_layer(rng, recipe, subtype, n_subtypes, strength, purity)
        present = np.flatnonzero(missing_layer != layer_index)
        order = rng.permutation(present)
        frame = pd.DataFrame(values[order], index=pd.Index(patients[order], name="patient_id"), columns=names)
        frame = frame.iloc[:, rng.permutation(frame.shape[1])]
        if recipe.orientation == FEATURES_IN_ROWS:
            frame = frame.T.rename_axis(index="feature_id")
        tables[recipe.name] = frame
        marker_tables.append(layer_markers.assign(layer=recipe.name))

    markers = pd.concat(marker_tables, ignore_index=True)
    index = pd.Index(patients, name="patient_id")
    labels = pd.Series(_subtype_names(n_subtypes)[subtype], index=index, name="planted_subtype")
    gene_sets, enriched = _gene_sets(rng_sets, tables["rna"].index, markers)
    return SyntheticCohort(
        seed=seed,
        tables=tables,
        orientations={r.name: r.orientation for r in RECIPES},
        kinds={r.name: r.kind for r in RECIPES},
        file_names={r.name: r.file_name for r in RECIPES},
        clinical=_clinical(rng_clinical, index, subtype),
        planted=labels,
        gene_sets=gene_sets,
        enriched_sets=enriched,
        markers=markers[["layer", "feature_id", "subtypes", "direction", "effect"]],
    )


def write_synthetic_cohort(
    out_dir: str | os.PathLike, n_patients: int = DEFAULT_PATIENTS, seed: int = DEFAULT_SEED, n_subtypes: int = 4
) -> list[Path]:
    """Simulate the cohort and write its files into `out_dir`, byte for byte the same per seed.

    Returns the written paths. Tables are tab-separated; names ending in .gz are gzip files
    with a zero time stamp so that the bytes do not depend on the clock.
    """
    cohort = make_synthetic_cohort(n_patients, n_subtypes, seed)
    out = Path(out_dir)
    written = [_write_tsv(cohort.clinical, out / "clinical.tsv", "%.1f")]
    for name, table in cohort.tables.items():
        float_format = "%.4f" if cohort.kinds[name] == "beta" else "%.5g"
        written.append(_write_tsv(table, out / cohort.file_names[name], float_format))
    written.append(_write_tsv(cohort.planted.to_frame(), out / "planted_subtypes.tsv", None, PLANTED_NOTE))
    lines = ["\t".join([name, description, *members]) for name, (description, members) in cohort.gene_sets.items()]
    atomic_write_text(out / "gene_sets.tsv", "\n".join(lines) + "\n")
    written.append(out / "gene_sets.tsv")
    return written


def read_planted_subtypes(path: str | os.PathLike) -> pd.Series:
    """The planted subtype per patient from a `planted_subtypes.tsv` (its '# ' note line skipped)."""
    try:
        table = pd.read_csv(path, sep="\t", comment="#", dtype=str)
    except (OSError, ValueError, UnicodeDecodeError) as error:
        reason = str(error).splitlines()[0] if str(error) else type(error).__name__
        raise InputError(f"{path}: found an unreadable file ({reason}), expected a tab-separated table") from error
    if list(table.columns) != ["patient_id", "planted_subtype"]:
        raise InputError(f"{path}, header: found {list(table.columns)}, expected ['patient_id', 'planted_subtype']")
    repeated = table["patient_id"][table["patient_id"].duplicated()]
    if not repeated.empty:
        raise InputError(f"{path}, column patient_id: found {repeated.iloc[0]!r} twice, expected unique patients")
    return table.set_index("patient_id")["planted_subtype"]


def _check_size(n_patients: int, n_subtypes: int) -> None:
    if not 2 <= n_subtypes <= _MAX_SUBTYPES:
        raise InputError(f"n_subtypes: found {n_subtypes}, expected an integer from 2 to {_MAX_SUBTYPES}")
    needed = math.ceil(_MIN_PATIENTS_PER_SUBTYPE / _subtype_shares(n_subtypes).min())
    if n_patients < needed:
        raise InputError(f"n_patients: found {n_patients}, expected at least {needed} for {n_subtypes} subtypes")


def _patient_ids(n_patients: int) -> np.ndarray:
    width = max(4, len(str(n_patients)))
    return np.array([f"CLB-{i:0{width}d}" for i in range(1, n_patients + 1)])


def _subtype_names(n_subtypes: int) -> np.ndarray:
    return np.array([f"S{i + 1}" for i in range(n_subtypes)])


def _subtype_shares(n_subtypes: int) -> np.ndarray:
    """Unequal shares falling linearly from the first to the last subtype (35/28/22/15 % for four)."""
    weights = 1.0 - 0.57 * np.arange(n_subtypes) / (n_subtypes - 1)
    return weights / weights.sum()


def _subtype_sizes(n_patients: int, n_subtypes: int) -> np.ndarray:
    """Whole patient counts per subtype, summing to `n_patients` (largest remainders round up)."""
    exact = n_patients * _subtype_shares(n_subtypes)
    sizes = np.floor(exact).astype(int)
    sizes[np.argsort(sizes - exact)[: n_patients - sizes.sum()]] += 1
    return sizes


def _missing_layers(rng: np.random.Generator, n_patients: int, n_layers: int) -> np.ndarray:
    """For each patient the index of the one layer it misses, or -1 (about 15 % miss one)."""
    missing = np.full(n_patients, -1)
    chosen = rng.choice(n_patients, size=round(MISSING_LAYER_FRACTION * n_patients), replace=False)
    missing[chosen] = np.arange(chosen.size) % n_layers
    return missing


def _layer_groups(merged_pairs: tuple[tuple[int, int], ...], n_subtypes: int) -> np.ndarray:
    """Group index of each subtype as this layer sees it: merged subtypes share one group.

    A merge that would leave the layer blind to every contrast is skipped (few subtypes).
    """
    group = np.arange(n_subtypes)
    for a, b in merged_pairs:
        merged = np.where(group == group[b % n_subtypes], group[a % n_subtypes], group)
        if np.unique(merged).size > 1:
            group = merged
    return np.unique(group, return_inverse=True)[1]


def _simulate_layer(
    rng: np.random.Generator,
    recipe: LayerRecipe,
    subtype: np.ndarray,
    n_subtypes: int,
    strength: np.ndarray,
    purity: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, pd.DataFrame]:
    """Values (patients x features, in the layer's own units), feature names, planted markers."""
    n_patients, n_features = subtype.size, recipe.n_features
    group_of_subtype = _layer_groups(recipe.merged_pairs, n_subtypes)
    n_groups = group_of_subtype.max() + 1
    n_markers = recipe.markers_per_group * n_groups if n_groups > 1 else 0

    marker_features = rng.permutation(n_features)[:n_markers]
    marker_group = np.repeat(np.arange(n_groups), recipe.markers_per_group)[:n_markers]
    direction = np.where(rng.random(n_markers) < 0.7, 1.0, -1.0)
    effect = recipe.effect * rng.uniform(0.6, 1.4, n_markers)
    shift = np.zeros((n_groups, n_features))
    shift[marker_group, marker_features] = direction * effect

    purity_loading = np.where(rng.random(n_features) < recipe.purity_features, rng.normal(0.0, 0.15, n_features), 0.0)
    noise_scale = recipe.noise * rng.uniform(0.8, 1.2, n_features)
    latent = (
        shift[group_of_subtype[subtype]] * strength[:, None]
        + purity[:, None] * purity_loading
        + rng.standard_normal((n_patients, n_features)) * noise_scale
    )
    values = _EMITTERS[recipe.kind](rng, latent)

    names = _feature_names(recipe.name, n_features)
    subtype_names = _subtype_names(n_subtypes)
    markers = pd.DataFrame(
        {
            "feature_id": names[marker_features],
            "subtypes": [",".join(subtype_names[group_of_subtype == g]) for g in marker_group],
            "direction": direction,
            "effect": effect,
        }
    )
    return values, names, markers.sort_values("feature_id", ignore_index=True)


def _feature_names(layer: str, n_features: int) -> np.ndarray:
    patterns = {"rna": "QZG{:04d}", "methylation": "QZM{:05d}", "mirna": "qz-miR-{:03d}", "protein": "QZG{:04d}_p"}
    pattern = patterns[layer]
    numbers = np.arange(1, n_features + 1)
    if layer == "protein":  # proteins are products of a spread of the fictional genes
        numbers = numbers * 7
    return np.array([pattern.format(i) for i in numbers])


def _emit_counts(rng: np.random.Generator, latent: np.ndarray) -> np.ndarray:
    """Negative binomial counts (gamma-Poisson) with varying library sizes and per-feature dispersion."""
    n_patients, n_features = latent.shape
    base = rng.normal(0.0, 1.0, n_features)
    share = np.exp2(base + latent)
    share /= share.sum(axis=1, keepdims=True)
    library = 150.0 * n_features * np.exp(rng.normal(0.0, 0.35, n_patients))
    mean = library[:, None] * share
    dispersion = np.exp(rng.normal(np.log(0.08), 0.4, n_features))
    rate = rng.gamma(1.0 / dispersion, mean * dispersion)
    return rng.poisson(rate).astype(np.int64)


def _emit_beta(rng: np.random.Generator, latent: np.ndarray) -> np.ndarray:
    """Beta values in (0, 1) from M-values around a bimodal baseline (most CpGs mostly un- or fully methylated)."""
    n_features = latent.shape[1]
    baseline = rng.choice([-3.5, 3.0, 0.0], size=n_features, p=[0.45, 0.4, 0.15]) + rng.normal(0.0, 0.8, n_features)
    beta = expit(np.log(2.0) * (baseline + latent))
    return np.clip(beta, 0.0005, 0.9995)


def _emit_abundance(rng: np.random.Generator, latent: np.ndarray) -> np.ndarray:
    """Log-normal abundance; low values go missing more often (scattered missing cells, ~4 %)."""
    n_features = latent.shape[1]
    log2_value = rng.normal(12.0, 2.0, n_features) + latent
    below = (log2_value - log2_value.mean(axis=0)) / log2_value.std(axis=0)
    missing = rng.random(latent.shape) < 0.2 * expit(-2.0 * (below + 1.5))
    return np.where(missing, np.nan, np.exp2(log2_value))


_EMITTERS = {"counts": _emit_counts, "beta": _emit_beta, "abundance": _emit_abundance}


def _clinical(rng: np.random.Generator, patients: pd.Index, subtype: np.ndarray) -> pd.DataFrame:
    """Age, sex, stage, treatment centre and overall survival with subtype-dependent hazards."""
    n = patients.size
    log_hazard_ratio = np.array([0.0, 0.6, -0.5, 1.1, 0.3, -0.2, 0.8, 0.1])[subtype]
    age = np.clip(np.round(rng.normal(63.0 + 3.0 * log_hazard_ratio, 10.0)), 28, 90).astype(int)
    sex = np.where(rng.random(n) < 0.5 + 0.15 * (subtype == 1), "female", "male")
    stage_index = np.searchsorted([-0.67, 0.25, 1.04], rng.normal(0.5 * log_hazard_ratio, 1.0))
    centre = rng.choice(_CENTRES, size=n, p=[0.45, 0.35, 0.2])
    hazard = np.exp(log_hazard_ratio + 0.025 * (age - 63) + 0.3 * (stage_index - 1))
    shape, median_months = 1.3, 70.0
    scale = median_months / np.log(2.0) ** (1.0 / shape)
    event_time = scale * (rng.exponential(1.0, n) / hazard) ** (1.0 / shape)
    censor_time = np.minimum(rng.uniform(24.0, 120.0, n), rng.exponential(300.0, n))
    return pd.DataFrame(
        {
            "age_years": age,
            "sex": sex,
            "stage": _STAGES[stage_index],
            "treatment_centre": centre,
            "os_months": np.maximum(np.round(np.minimum(event_time, censor_time), 1), 0.1),
            "os_event": (event_time <= censor_time).astype(int),
        },
        index=patients,
    )


def _gene_sets(
    rng: np.random.Generator, genes: pd.Index, markers: pd.DataFrame
) -> tuple[dict[str, tuple[str, list[str]]], dict[str, tuple[str, ...]]]:
    """Forty fictional gene sets: one per RNA marker group enriched in its up-markers, the rest random."""
    up = markers[(markers["layer"] == "rna") & (markers["direction"] > 0)]
    enriched_members = [
        (tuple(marked.split(",")), list(group["feature_id"])) for marked, group in up.groupby("subtypes", sort=True)
    ]
    n_sets = 40
    slots = rng.permutation(n_sets)
    gene_names = genes.to_numpy()
    sets, enriched = {}, {}
    for slot, set_index in enumerate(slots):
        name = f"qz_programme_{set_index + 1:02d}"
        size = int(rng.integers(15, 60))
        members = rng.choice(gene_names, size=size, replace=False)
        if slot < len(enriched_members):
            marked, pool = enriched_members[slot]
            planted = rng.choice(pool, size=min(len(pool), size // 2), replace=False)
            members = np.concatenate([planted, members[~np.isin(members, planted)]])[:size]
            enriched[name] = marked
        sets[name] = (f"fictional gene programme {set_index + 1} (Corrowmere annotation)", sorted(members.tolist()))
    return dict(sorted(sets.items())), dict(sorted(enriched.items()))


def _write_tsv(frame: pd.DataFrame, path: Path, float_format: str | None, note: str | None = None) -> Path:
    """Tab-separated with the index as first column; gzip when the name ends in .gz."""
    text = guarded(frame).to_csv(sep="\t", float_format=float_format, na_rep="NA", lineterminator="\n")
    if note:
        text = f"# {note}\n{text}"
    if path.suffix == ".gz":
        atomic_write_bytes(path, gzip.compress(text.encode("utf-8"), compresslevel=6, mtime=0))
    else:
        atomic_write_text(path, text)
    return path
