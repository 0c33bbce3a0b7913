"""The README's main command on the bundled cohort: wall time, peak memory, time per stage.

Usage: python tests/benchmarks/bench_workflow.py [--out DIR] [--jobs N]
Runs `strataweave run workflows/synthetic_cohort.toml --out DIR --quiet` in a fresh process
(DIR is replaced; default: a temporary folder), then prints the wall time, the peak resident
memory of the run (its process and the workers it started) and each stage's seconds from
manifest.json. Target: under 3 minutes on 2 cores. Timings on a shared machine are noisy.
"""

from __future__ import annotations

import argparse
import json
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPOSITORY = Path(__file__).resolve().parents[2]
WORKFLOW = REPOSITORY / "workflows" / "synthetic_cohort.toml"
TARGET_SECONDS = 180.0


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--out", type=Path, help="run folder to write (replaced)")
    parser.add_argument("--jobs", type=int, help="passed on as --jobs")
    args = parser.parse_args(argv)
    out = args.out or Path(tempfile.mkdtemp(prefix="bench_workflow_")) / "run"
    shutil.rmtree(out, ignore_errors=True)
    command = [sys.executable, "-m", "strataweave.cli", "run", str(WORKFLOW), "--out", str(out), "--quiet"]
    if args.jobs:
        command += ["--jobs", str(args.jobs)]

    start = time.perf_counter()
    finished = subprocess.run(command, cwd=REPOSITORY)
    wall = time.perf_counter() - start
    peak_mb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024  # Linux reports kB
    if finished.returncode != 0:
        print(f"run failed with exit code {finished.returncode}")
        return 1

    manifest = json.loads((out / "manifest.json").read_text())
    results = json.loads((out / "results.json").read_text())
    print(f"command: {' '.join(command[2:])}")
    print(f"wall time: {wall:.1f} s (target {TARGET_SECONDS:.0f} s: {'met' if wall <= TARGET_SECONDS else 'missed'})")
    print(f"peak memory (largest single process): {peak_mb:.0f} MB")
    print(f"subtypes: {results['subtype_count']} (recommended {results['selection']['recommended']})")
    print("stage          seconds  share")
    for name, stage in manifest["stages"].items():
        print(f"{name:<14} {stage['seconds']:7.1f}  {stage['seconds'] / wall:5.0%}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
