"""Invented cohorts for the validity panel: a generator with knobs the bundled demo leaves alone.

Each design plants subtypes of unequal size; every modality sees only a coarsening of them
(some subtypes merged, so no single layer need separate all), carries noise-only features,
and may miss patients, carry a batch effect unrelated to the subtypes, or have heavy-tailed
counts. The data are invented (fictional biobank, fictional feature names), for benchmarks only.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy.special import expit


@dataclass(frozen=True)
class LayerDesign:
    """One omics layer: its kind, width, informative features per group and how many merges it makes."""

    kind: str
    n_features: int
    markers_per_group: int
    merges: int = 0
    effect: float = 1.5


@dataclass(frozen=True)
class CohortDesign:
    """Knobs of one invented cohort (see the module docstring)."""

    name: str
    n_patients: int
    n_subtypes: int
    layers: tuple[LayerDesign, ...]
    smallest_share: float = 0.3  # size of the smallest subtype relative to the largest
    missing_fraction: float = 0.0  # share of patients missing one layer
    batch_layer: int | None = None  # layer with a two-batch shift unrelated to the subtypes
    heavy_tails: bool = False  # t(3) noise and wide dispersion in count layers
    seed: int = 0
    notes: str = field(default="")


def _sizes(n_patients: int, n_subtypes: int, smallest_share: float) -> np.ndarray:
    weights = np.linspace(1.0, smallest_share, n_subtypes)
    exact = n_patients * weights / weights.sum()
    sizes = np.floor(exact).astype(int)
    sizes[np.argsort(sizes - exact)[: n_patients - sizes.sum()]] += 1
    return sizes


def _layer_groups(rng: np.random.Generator, n_subtypes: int, merges: int) -> np.ndarray:
    """Group of each subtype as a layer sees it, after `merges` random merges (at least two groups left)."""
    group = np.arange(n_subtypes)
    for _ in range(min(merges, n_subtypes - 2)):
        a, b = rng.choice(np.unique(group), size=2, replace=False)
        group[group == b] = a
    return np.unique(group, return_inverse=True)[1]


def _all_pairs_separated(groupings: list[np.ndarray]) -> bool:
    together = np.ones((groupings[0].size,) * 2, dtype=bool)
    for g in groupings:
        together &= g[:, None] == g[None, :]
    return bool(np.array_equal(together, np.eye(groupings[0].size, dtype=bool)))


def _emit(rng: np.random.Generator, kind: str, latent: np.ndarray, heavy: bool) -> np.ndarray:
    """Values of a layer in its own units from a latent log-scale matrix."""
    n, p = latent.shape
    if kind == "counts":
        share = np.exp2(rng.normal(0.0, 1.0, p) + latent)
        share /= share.sum(axis=1, keepdims=True)
        library = 100.0 * p * np.exp(rng.normal(0.0, 0.5 if heavy else 0.3, n))
        dispersion = np.exp(rng.normal(np.log(0.4 if heavy else 0.08), 0.5, p))
        return rng.poisson(rng.gamma(1.0 / dispersion, library[:, None] * share * dispersion)).astype(float)
    if kind == "beta":
        baseline = rng.choice([-3.0, 2.5, 0.0], size=p, p=[0.45, 0.4, 0.15]) + rng.normal(0.0, 0.8, p)
        return np.clip(expit(np.log(2.0) * (baseline + 1.5 * latent)), 0.001, 0.999)
    if kind == "abundance":
        log2_value = rng.normal(14.0, 2.0, p) + latent
        missing = rng.random(latent.shape) < 0.03
        return np.where(missing, np.nan, np.exp2(log2_value))
    if kind == "copy_number":
        return 0.3 * latent
    return rng.normal(6.0, 2.0, p) + latent  # log_expression


def make_design_cohort(design: CohortDesign):
    """(raw layers as patients x features DataFrames, kinds, planted labels Series)."""
    rng = np.random.default_rng(design.seed)
    k = design.n_subtypes
    truth = rng.permutation(np.repeat(np.arange(k), _sizes(design.n_patients, k, design.smallest_share)))
    for _ in range(100):
        groupings = [_layer_groups(rng, k, layer.merges) for layer in design.layers]
        if _all_pairs_separated(groupings):
            break
    patients = np.array([f"VLB-{i:05d}" for i in range(design.n_patients)])
    missing_layer = np.full(design.n_patients, -1)
    if design.missing_fraction > 0 and len(design.layers) > 1:
        chosen = rng.choice(design.n_patients, size=round(design.missing_fraction * design.n_patients), replace=False)
        missing_layer[chosen] = rng.integers(0, len(design.layers), chosen.size)
    layers, kinds = {}, {}
    for index, (layer, groups) in enumerate(zip(design.layers, groupings)):
        n_groups = groups.max() + 1
        markers = rng.permutation(layer.n_features)[: layer.markers_per_group * n_groups]
        shift = np.zeros((n_groups, layer.n_features))
        owner = np.repeat(np.arange(n_groups), layer.markers_per_group)
        shift[owner, markers] = np.where(rng.random(markers.size) < 0.6, 1.0, -1.0) * layer.effect * rng.uniform(
            0.6, 1.4, markers.size
        )
        noise = rng.standard_t(3, (design.n_patients, layer.n_features)) / np.sqrt(3.0) if (
            design.heavy_tails and layer.kind == "counts"
        ) else rng.standard_normal((design.n_patients, layer.n_features))
        latent = shift[groups[truth]] + noise * rng.uniform(0.7, 1.3, layer.n_features)
        if design.batch_layer == index:
            batch = rng.random(design.n_patients) < 0.5
            hit = rng.random(layer.n_features) < 0.3
            latent = latent + np.outer(batch, hit * rng.normal(0.0, 1.2 * layer.effect, layer.n_features))
        values = _emit(rng, layer.kind, latent, design.heavy_tails)
        keep = missing_layer != index
        name = f"{layer.kind}_{index + 1}"
        columns = [f"vq{index + 1}_{j:04d}" for j in range(layer.n_features)]
        layers[name] = pd.DataFrame(values[keep], index=pd.Index(patients[keep], name="patient_id"), columns=columns)
        kinds[name] = layer.kind
    return layers, kinds, pd.Series(truth, index=pd.Index(patients, name="patient_id"), name="planted")


def _layers(*specs) -> tuple[LayerDesign, ...]:
    return tuple(LayerDesign(*spec) for spec in specs)


#: The invented half of the panel: 2-6 modalities, 2-10 subtypes, unequal sizes, 0-30 %
#: missing a layer, noise-only features, blind layers, a batch effect, heavy-tailed counts.
DESIGNS = (
    CohortDesign("two_layers_3", 300, 3, _layers(("counts", 1500, 50, 1), ("beta", 1200, 40, 0)), seed=11),
    CohortDesign(
        "three_layers_5_blind", 400, 5,
        _layers(("counts", 2000, 60, 2), ("beta", 1500, 50, 2), ("abundance", 150, 12, 2)),
        missing_fraction=0.2, smallest_share=0.35, seed=12,
    ),
    CohortDesign(
        "four_layers_4_batch", 350, 4,
        _layers(("counts", 1800, 50, 1), ("beta", 1000, 40, 1), ("counts", 300, 20, 1), ("copy_number", 400, 30, 2)),
        missing_fraction=0.15, batch_layer=1, seed=13,
    ),
    CohortDesign(
        "six_layers_6_uneven", 500, 6,
        _layers(("counts", 2000, 50, 3), ("beta", 1500, 40, 3), ("abundance", 100, 10, 3),
                ("log_expression", 50, 5, 4, 1.0), ("copy_number", 600, 20, 4, 1.0), ("counts", 200, 15, 3)),
        missing_fraction=0.3, seed=14,
    ),
    CohortDesign(
        "two_layers_2_heavy", 250, 2, _layers(("counts", 1500, 40, 0), ("abundance", 120, 12, 0, 1.0)),
        heavy_tails=True, smallest_share=0.4, seed=15,
    ),
    CohortDesign(
        "three_layers_8_many", 800, 8,
        _layers(("counts", 2000, 50, 3), ("beta", 1500, 40, 3), ("abundance", 200, 15, 3)),
        missing_fraction=0.1, smallest_share=0.4, seed=16,
    ),
    CohortDesign(
        "five_layers_10_wide", 1000, 10,
        _layers(("counts", 2000, 40, 4), ("beta", 2000, 40, 4), ("abundance", 150, 10, 5),
                ("counts", 400, 20, 5), ("log_expression", 80, 10, 5)),
        missing_fraction=0.2, smallest_share=0.5, seed=17,
    ),
    CohortDesign(
        "three_layers_4_small_group", 400, 4,
        _layers(("counts", 1500, 40, 1), ("beta", 1000, 30, 1), ("abundance", 100, 10, 1)),
        smallest_share=0.15, missing_fraction=0.1, heavy_tails=True, seed=18,
    ),
)
