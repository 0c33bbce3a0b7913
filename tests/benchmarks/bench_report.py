"""The report stage alone: render_run on a finished run folder at 400 and 2,000 patients.

Usage: python tests/benchmarks/bench_report.py [--runs DIR] [--sizes 400 2000] [--repeats 3]
Builds, once, a run folder per size under DIR (default: a temporary folder) from the bundled
workflow on the synthetic cohort of that size, with 6 resamples per count so the build is quick
(the report draws the same figures whatever the resample count); an existing finished folder is
reused. Then renders each folder `--repeats` times, sizes interleaved so load on a shared machine
falls on every size alike, and prints the median wall time (figures and slides on one forked
worker per core, as the report draws them), its ratio to the 5 s target, the wall time of one
rendering in this process alone, and the cProfile cumulative seconds of the report's parts from
that serial rendering (a profile sees only its own process).
"""

from __future__ import annotations

import argparse
import cProfile
import pstats
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPOSITORY = Path(__file__).resolve().parents[2]
WORKFLOW = REPOSITORY / "workflows" / "synthetic_cohort.toml"
TARGET_SECONDS = 5.0
RESAMPLES = 6
#: (label, pstats function name) of the parts whose cumulative time is printed
PARTS = (("figures", "draw_figures"), ("figure saves", "save_figure"), ("slides", "render_slides"),
         ("constrained layout", "do_constrained_layout"), ("html", "render_html"))


def build_run(root: Path, patients: int) -> Path:
    """A finished run folder of the bundled workflow on a synthetic cohort of `patients` patients."""
    from strataweave.data.synthetic import write_synthetic_cohort

    out = root / f"run_{patients}"
    if (out / "results.json").is_file():
        return out
    cohort = root / f"cohort_{patients}"
    write_synthetic_cohort(cohort, n_patients=patients)
    text = WORKFLOW.read_text(encoding="utf-8").replace("../synthetic_cohort/", f"{cohort.as_posix()}/")
    text = re.sub(r"(?m)^n_resamples = \d+", f"n_resamples = {RESAMPLES}", text)
    workflow = root / f"workflow_{patients}.toml"
    workflow.write_text(text, encoding="utf-8")
    subprocess.run([sys.executable, "-m", "strataweave.cli", "run", str(workflow), "--out", str(out), "--quiet"],
                   cwd=REPOSITORY, check=True)
    return out


def render_copy(run: Path, work: Path) -> float:
    """Wall seconds of render_run on a fresh copy of `run` (no figures of an earlier rendering)."""
    from strataweave.report.render import render_run

    shutil.rmtree(work, ignore_errors=True)
    shutil.copytree(run, work, ignore=shutil.ignore_patterns("figures", "report.html", "slides.pdf"))
    start = time.perf_counter()
    render_run(work)
    return time.perf_counter() - start


def serial_render(run: Path, work: Path) -> tuple[float, dict[str, float]]:
    """Wall seconds of one rendering in this process alone, and the cumulative seconds of each
    part of PARTS in one more, profiled, such rendering."""
    from strataweave.report import drawing_pool

    cores = drawing_pool.available_cores
    drawing_pool.available_cores = lambda: 1
    try:
        wall = render_copy(run, work)
        profile = cProfile.Profile()
        profile.runcall(render_copy, run, work)
    finally:
        drawing_pool.available_cores = cores
    stats = pstats.Stats(profile).stats
    totals = {label: 0.0 for label, _ in PARTS}
    for (_, _, function), (_, _, _, cumulative, _) in stats.items():
        for label, name in PARTS:
            if function == name:
                totals[label] = max(totals[label], cumulative)
    return wall, totals


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--runs", type=Path, help="folder of the run folders (built when missing, then reused)")
    parser.add_argument("--sizes", type=int, nargs="+", default=[400, 2000])
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)
    root = args.runs or Path(tempfile.mkdtemp(prefix="bench_report_"))
    root.mkdir(parents=True, exist_ok=True)
    runs = {n: build_run(root, n) for n in args.sizes}
    import strataweave.report.render  # noqa: F401  (the plotting stack's import is not part of the stage)

    walls: dict[int, list[float]] = {n: [] for n in args.sizes}
    for _ in range(args.repeats):
        for n in args.sizes:
            walls[n].append(render_copy(runs[n], root / f"render_{n}"))
    print(f"report stage, median of {args.repeats} (target {TARGET_SECONDS:.0f} s at 2,000 patients)")
    print("patients   wall s  x target  serial s  " + "  ".join(f"{label} (cProfile s)" for label, _ in PARTS))
    for n in args.sizes:
        wall = statistics.median(walls[n])
        serial, parts = serial_render(runs[n], root / f"render_{n}")
        print(f"{n:8d}  {wall:7.2f}  {wall / TARGET_SECONDS:8.2f}  {serial:8.2f}  "
              + "  ".join(f"{parts[label]:{len(label) + 13}.2f}" for label, _ in PARTS))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
