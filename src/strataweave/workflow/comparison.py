"""`strataweave compare`: how the subtypes of two finished runs agree (ARI, NMI, contingency, flow), as tables,
a figure and an HTML page."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd

from strataweave.caution import CAUTION
from strataweave.errors import InputError
from strataweave.files import atomic_write_text, write_table
from strataweave.report.comparison_view import ComparisonView
from strataweave.report.render import COMPARISON_FIGURE, COMPARISON_PAGE, render_comparison
from strataweave.subtypes.compare import compare_partitions, split_flow
from strataweave.workflow.run_folder import check_new_file, finished_run

COMPARISON_FILES = ("comparison.json", "contingency.tsv", "flow.tsv", COMPARISON_PAGE, f"{COMPARISON_FIGURE}.png",
                    f"{COMPARISON_FIGURE}.svg")


def read_assignments(run_dir: str | Path) -> pd.Series:
    """Subtype per patient from a finished run's assignments.tsv."""
    path = finished_run(run_dir).path / "assignments.tsv"
    try:
        table = pd.read_csv(path, sep="\t", comment="#", dtype={"patient_id": str, "subtype": str})
    except (OSError, ValueError) as problem:
        raise InputError(f"{path}: not readable ({problem}), expected the run's assignments table") from None
    if not {"patient_id", "subtype"} <= set(table.columns):
        raise InputError(f"{path}: header {list(table.columns)[:4]}, expected columns patient_id and subtype")
    return table.set_index("patient_id")["subtype"]


def compare_runs(run_a: str | Path, run_b: str | Path, out: str | Path | None = None, force: bool = False) -> str:
    """A printable summary; with `out`, comparison.json, contingency.tsv, flow.tsv, the figure and the page
    written there (existing ones replaced only with `force`, never inside a finished run)."""
    if out is not None:
        for name in COMPARISON_FILES:
            check_new_file(Path(out) / name, [], force)
    a, b = read_assignments(run_a), read_assignments(run_b)
    comparison = compare_partitions(a, b)
    flow = split_flow(a, b)
    contingency = comparison.contingency.rename_axis(index="subtype_a", columns="subtype_b")
    if out is not None:
        out = Path(out)
        summary = {"caution": CAUTION, "run_a": str(Path(run_a).resolve()), "run_b": str(Path(run_b).resolve()),
                   **comparison.to_dict()}
        atomic_write_text(out / COMPARISON_FILES[0], json.dumps(summary, indent=1) + "\n")
        write_table(contingency.reset_index(), out / COMPARISON_FILES[1], comment=CAUTION)
        write_table(flow, out / COMPARISON_FILES[2], comment=CAUTION)
        names = Path(run_a).resolve().name, Path(run_b).resolve().name
        render_comparison(out, ComparisonView(*names, comparison.contingency, comparison.ari, comparison.nmi,
                                              comparison.n_patients, CAUTION))
    return (
        f"ARI {comparison.ari:.3f}, NMI {comparison.nmi:.3f} over {comparison.n_patients} shared patients "
        f"(rows: {Path(run_a).name}, columns: {Path(run_b).name})\n{contingency.to_string()}"
    )
