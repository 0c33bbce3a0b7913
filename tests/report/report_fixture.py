"""A small invented run folder that follows strataweave.report.contract, for rendering tests."""

from __future__ import annotations

import io
import json
from pathlib import Path

import numpy as np

from strataweave.caution import CAUTION
from strataweave.files import atomic_write_bytes, atomic_write_text

LABELS = ["S1", "S2", "S3"]
# User strings that try to break out of HTML, of matplotlib text ($...$) and of PDF text.
HOSTILE_TITLE = '<script>alert("title")</script> Tom & Jerry\'s "cohort"'
HOSTILE_MODALITIES = ("rna<b>bold</b>", 'meth"yl&amp;ation\'')
HOSTILE_PREFIX = '<img src=x onerror=alert(1)>$F&"'
HOSTILE_CLINICAL = "<script>stage</script>&<'\">"
HOSTILE_STRINGS = (HOSTILE_TITLE, *HOSTILE_MODALITIES, HOSTILE_CLINICAL, HOSTILE_PREFIX)


def _step_curve(rng: np.random.Generator, scale: float, n_steps: int) -> dict[str, np.ndarray]:
    """An invented Kaplan-Meier-like step curve with a band (plotting input only)."""
    time = np.concatenate([[0.0], np.sort(rng.uniform(0, 60, n_steps))])
    survival = np.exp(-time / scale)
    width = 0.05 + 0.1 * time / 60
    return {
        "time": time,
        "survival": survival,
        "lower": np.clip(survival - width, 0, 1),
        "upper": np.clip(survival + width, 0, 1),
    }


def _consensus(codes: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    same = codes[:, None] == codes[None, :]
    noise = rng.uniform(0, 0.15, size=same.shape)
    matrix = np.where(same, 1 - noise, noise)
    matrix = (matrix + matrix.T) / 2
    np.fill_diagonal(matrix, 1.0)
    return matrix.astype(np.float32)


def _modality_view_arrays(rng: np.random.Generator, codes: np.ndarray, n_modalities: int, feature_prefix: str,
                          marker_blocks: int) -> dict[str, np.ndarray]:
    """Invented per-modality maps, separation, factor shares and loadings, and volcano arrays (plotting input only)."""
    arrays: dict[str, np.ndarray] = {}
    for m in range(n_modalities):
        arrays[f"modality_{m}_map"] = rng.normal(size=(codes.size, 2)) + codes[:, None] * (2.0 - m)
        arrays[f"modality_{m}_map_codes"] = codes
        arrays[f"modality_{m}_map_variance"] = np.array([0.21, 0.08])
    arrays["modality_separation"] = rng.uniform(-0.1, 0.6, size=(n_modalities, 3))
    contribution = rng.uniform(0.2, 1.0, size=(n_modalities, 3))
    arrays["factor_contribution"] = contribution / contribution.sum(axis=0)
    arrays["factor_top_share"] = np.sort(rng.uniform(0.01, 0.05, size=(3, 8)), axis=1)[:, ::-1]
    arrays["factor_top_feature"] = np.array([[f"{feature_prefix}{j}_{t} +" for t in range(8)] for j in range(3)])
    arrays["factor_top_modality"] = rng.integers(0, n_modalities, size=(3, 8))
    arrays["factor_subtype_mean"] = np.eye(3) * 0.05 + 0.01
    for i in range(marker_blocks):
        difference = rng.normal(scale=0.6, size=(3, 40))
        arrays[f"volcano_{i}_difference"] = difference
        arrays[f"volcano_{i}_p"] = np.exp(-6 * np.abs(difference)) * rng.uniform(0.2, 1.0, size=(3, 40))
        arrays[f"volcano_{i}_significant"] = arrays[f"volcano_{i}_p"] < 0.01
        arrays[f"volcano_{i}_features"] = np.array([f"{feature_prefix}{i}_{j}" for j in range(40)])
    return arrays


def make_results(modality_names=("rna", "methylation"), feature_prefix="FX", title="Fictional biobank run",
                 show_patient_ids=False, survival=True, markers=True, n=60,
                 clinical_name="stage") -> tuple[dict, dict]:
    """results.json content and figure_data arrays for an invented 3-subtype run of `n` patients."""
    rng = np.random.default_rng(7)
    codes = np.sort(rng.integers(0, 3, size=n))
    sizes = np.bincount(codes, minlength=3)
    counts = [2, 3, 4]
    modalities = [
        {
            "name": name,
            "kind": "counts" if i == 0 else "beta",
            "patients": n - 5 * (i + 1),
            "features_in_file": 2000,
            "filters": [
                {"step": "missing_filter", "features_after": 1900},
                {"step": "variance_filter", "features_after": 1200},
                {"step": "top_features", "features_after": 500},
            ],
            "missing_fraction": 0.02 * (i + 1),
        }
        for i, name in enumerate(modality_names)
    ]
    results = {
        "caution": CAUTION,
        "subtype_count": 3,
        "report": {"title": title, "show_patient_ids": show_patient_ids},
        "cohort": {"patients": n, "modalities": modalities},
        "graph": {
            "rule": "intersection",
            "neighbours": 10,
            "isolated_patients": 2,
            "fallback_patients": 2,
            "components": 1,
            "rule_evidence": [
                {"rule": "intersection", "quorum": None, "confirmed_share": 0.61, "fallback_patients": 2, "chosen": True},
                {"rule": "average", "quorum": None, "confirmed_share": 0.47, "fallback_patients": 0, "chosen": False},
            ],
            "agreement": [
                {"modality_a": a, "modality_b": b, "overlap": 0.3}
                for j, a in enumerate(modality_names)
                for b in modality_names[j + 1:]
            ],
        },
        "selection": {
            "counts": counts,
            "criteria": {
                "pac": [0.2, 0.05, 0.3],
                "cophenetic": [0.95, 0.99, 0.9],
                "silhouette": [0.3, 0.45, 0.2],
                "eigengap": [0.1, 0.4, None],
                "smallest_size": [25, int(sizes.min()), 8],
            },
            "higher_is_better": {"pac": False, "cophenetic": True, "silhouette": True, "eigengap": True,
                                 "smallest_size": None},
            "partitions": [
                {"count": k, "source": "fused_graph" if k == 3 else "joint_model", "agreement_joint_model": 0.41,
                 "agreement_fused_graph": 0.43 if k == 3 else 0.39}
                for k in counts
            ],
            "recommended": 3,
            "reason": "Count 3 has the lowest PAC & every subtype has at least 10 patients.",
            "overridden": False,
            "flow": [
                {"count": 2, "source": 0, "target": 0, "patients": int(sizes[0])},
                {"count": 2, "source": 1, "target": 1, "patients": int(sizes[1])},
                {"count": 2, "source": 1, "target": 2, "patients": int(sizes[2])},
                {"count": 3, "source": 0, "target": 0, "patients": int(sizes[0])},
                {"count": 3, "source": 1, "target": 1, "patients": int(sizes[1]) - 4},
                {"count": 3, "source": 1, "target": 3, "patients": 4},
                {"count": 3, "source": 2, "target": 2, "patients": int(sizes[2])},
            ],
        },
        "subtypes": {"labels": LABELS, "sizes": [int(s) for s in sizes], "core_threshold": 0.8},
        "baselines": [
            {"method": "spectral clustering on the fused graph", "ari": 0.71, "nmi": 0.68},
            {"method": "k-means on concatenated modalities", "ari": 0.52, "nmi": 0.55},
        ],
        "parameters": {
            "seed": 20261201,
            "graph": {"rule": "intersection", "n_neighbours": 10, "kernel": "scaled_exponential"},
            "factorization": {"graph_weight": 0.5, "n_restarts": 3, "max_iter": 200},
            "resampling": {"n_resamples": 20, "fraction": 0.8, "backend": "serial"},
            "subtypes": {"counts": counts, "pac_window": [0.1, 0.9], "min_size": 10},
            "evaluation": {"n_permutations": 1000, "marker_test": "mannwhitney", "covariates": ["age_years"]},
            "modalities": [
                {"name": name, "weight": 1.0, "kind": "counts" if i == 0 else "beta", "prior_count": 0.5,
                 "beta_to_m": True, "quantile_normalise": False, "max_missing_fraction": 0.2, "min_variance": 1e-8,
                 "top_features": 500, "rank_by": "variance", "impute": "knn" if i == 0 else "median",
                 "impute_neighbours": 10, "scale": "zscore", "non_negative": "split"}
                for i, name in enumerate(modality_names)
            ],
        },
    }
    arrays = {
        "subtype_code": codes,
        "confidence": rng.uniform(0.3, 1.0, size=n),
        "core": rng.uniform(size=n) < 0.7,
        "presence": rng.uniform(size=(n, len(modality_names))) < 0.85,
        "embedding": rng.normal(size=(n, 2)) + codes[:, None] * 3.0,
        "patient_ids": np.array([f"PX-{i:03d}" for i in range(n)]),
    }
    for k in counts:
        codes_k = np.sort(np.minimum(codes * k // 3 + (np.arange(n) % 2) * (k > 3), k - 1))
        arrays[f"consensus_k{k}"] = _consensus(codes_k, rng)
        arrays[f"consensus_k{k}_codes"] = codes_k
    if survival:
        results["survival"] = {
            "time_unit": "months",
            "not_tested": None,
            "logrank": {"statistic": 14.2, "df": 2, "p_value": 0.00082, "p_value_permutation": 0.001,
                        "permutations": 1000},
            "cox": [
                {"term": "group S2 vs S1", "hazard_ratio": 2.1, "ci_lower": 1.2, "ci_upper": 3.6, "p_value": 0.01},
                {"term": "group S3 vs S1", "hazard_ratio": 0.7, "ci_lower": 0.35, "ci_upper": 1.4, "p_value": 0.3},
                {"term": "age_years", "hazard_ratio": 1.01, "ci_lower": 0.99, "ci_upper": 1.03, "p_value": 0.4},
            ],
            "concordance": 0.66,
            "ph_global": {"statistic": 9.2, "df": 3, "p_value": 0.027},
            "ph_check": [{"term": "group S2 vs S1", "statistic": 6.1, "p_value": 0.014},
                         {"term": "group S3 vs S1", "statistic": 0.4, "p_value": 0.53},
                         {"term": "age_years", "statistic": 1.2, "p_value": 0.27}],
            "ph_warning": "The hazards do not look proportional over time (global Schoenfeld test p = 0.027).",
            "medians": [{"group": g, "median": m} for g, m in zip(LABELS, [40.0, 18.5, None])],
            "rmst_horizon": 36.0,
            "rmst": [{"group": g, "rmst": r, "difference_vs_S1": d}
                     for g, r, d in zip(LABELS, [28.1, 19.4, 31.0], [0.0, -8.7, 2.9])],
            "pairwise": [{"group_a": "S1", "group_b": "S2", "p_adjusted": 0.003}],
        }
        for g, scale in enumerate([60.0, 25.0, 90.0]):
            for key, values in _step_curve(rng, scale, 15).items():
                arrays[f"km_{g}_{key}"] = values
        arrays["km_at_risk_time"] = np.array([0.0, 12.0, 24.0, 36.0, 48.0])
        arrays["km_at_risk"] = np.array([[20, 17, 12, 8, 3], [22, 15, 9, 4, 1], [18, 16, 14, 11, 7]])
    results["clinical"] = [  # as the workflow writes them: machine names of tests and effect sizes
        {"variable": clinical_name, "kind": "categorical", "test": "chi_square", "statistic": 12.3, "df": 4,
         "p_value": 0.004, "p_adjusted": 0.008, "effect_size": 0.31, "effect_size_name": "cramers_v",
         "anova_statistic": None, "anova_p_value": None, "n_used": n - 2, "n_missing": 2, "status": "tested",
         "dropped": 2},
        {"variable": "age_years", "kind": "continuous", "test": "kruskal_wallis", "statistic": 1.4, "df": 2,
         "p_value": 0.5, "p_adjusted": 0.5, "effect_size": 0.02, "effect_size_name": "epsilon_squared",
         "anova_statistic": 0.8, "anova_p_value": 0.45, "n_used": n, "n_missing": 0, "status": "tested",
         "dropped": 0},
    ]
    results["clinical_summary"] = {"groups": LABELS, "rows": [
        {"variable": clinical_name, "level": "I", "S1": "12 (60%)", "S2": "5 (25%)", "S3": "9 (45%)",
         "test": "chi_square", "p_adjusted": 0.008},
        {"variable": clinical_name, "level": "II", "S1": "8 (40%)", "S2": "15 (75%)", "S3": "11 (55%)",
         "test": "", "p_adjusted": None},
        {"variable": "age_years", "level": "median [IQR]", "S1": "61 [55\u201368]", "S2": "58 [50\u201366]",
         "S3": "63 [57\u201370]", "test": "kruskal_wallis", "p_adjusted": 0.5},
    ]}
    if markers:
        results["markers"] = []
        results["enrichment"] = []
        for i, name in enumerate(modality_names):
            features = np.array([f"{feature_prefix}{i}_{j}" for j in range(9)])
            feature_code = np.repeat([0, 1, 2], 3)
            patients = np.sort(rng.integers(0, 3, size=n - 5))
            values = rng.normal(size=(9, n - 5)) + 2.0 * (feature_code[:, None] == patients[None, :])
            arrays[f"markers_{i}_values"] = values
            arrays[f"markers_{i}_features"] = features
            arrays[f"markers_{i}_feature_code"] = feature_code
            arrays[f"markers_{i}_patient_code"] = patients
            results["markers"].append({
                "modality": name,
                "test": "mann_whitney",
                "rows": [{"subtype": LABELS[c], "feature": str(f), "effect": 1.5, "auc": 0.85, "p_adjusted": 0.001}
                         for f, c in zip(features, feature_code)],
            })
        results["enrichment"] = [
            {"subtype": LABELS[s], "gene_set": f"{feature_prefix} set {s}-{j}", "overlap": 3 + j, "set_size": 20,
             "p_adjusted": 10.0 ** (-(4 - j))}
            for s in range(3) for j in range(3)
        ]
        results["enrichment_summary"] = {"rank_test_rows": [
            {"subtype": LABELS[s], "gene_set": f"{feature_prefix} set {s}-0", "set_size": 20, "auc": 0.8 - 0.05 * s,
             "z": 4.0, "p_value": 1e-4, "p_adjusted": 1e-3} for s in range(3)]}
    arrays.update(_modality_view_arrays(rng, codes, len(modality_names), feature_prefix,
                                        len(modality_names) if markers else 0))
    return results, arrays


def write_run_folder(root: Path, results: dict, arrays: dict, manifest: dict | None = None) -> Path:
    """Write results.json, stages/figure_data.npz and manifest.json into `root`."""
    root.mkdir(parents=True, exist_ok=True)
    atomic_write_text(root / "results.json", json.dumps(results, indent=1))
    buffer = io.BytesIO()
    np.savez(buffer, **arrays)
    atomic_write_bytes(root / "stages" / "figure_data.npz", buffer.getvalue())
    manifest = manifest if manifest is not None else {
        "command": ["strataweave", "run", "workflows/fictional biobank.toml", "--out", "runs/demo"],
        "created": "2026-12-01T22:00:00+00:00",
        "strataweave_version": "0.1.0",
        "python": "3.11.2",
        "platform": "Linux-x86_64",
        "packages": {"numpy": "1.26.4", "scipy": "1.11.4"},
        "seed": 20261201,
        "workflow": {"path": "workflows/fictional biobank.toml", "sha256": "12" * 32,
                     "text": '[report]\ntitle = "<script>x</script> & co"\n'},
        "inputs": {"clinical.tsv": "ab" * 32},
        "stages": {"load": {"seconds": 0.4, "key": "cd" * 8}, "sweep": {"seconds": 12.5, "key": "ef" * 8}},
    }
    atomic_write_text(root / "manifest.json", json.dumps(manifest, indent=1))
    return root

