"""Run every benchmark script in this folder (bench_*.py) one after another.

Usage: python tests/benchmarks/run_benchmarks.py [NAME ...]
NAME picks benchmarks by substring (e.g. `graph`, `panel` for the validity panel); no NAME runs them all. Each script
prints its own table. Benchmarks measure speed and memory targets; they are never part of
the default test run.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main(argv: list[str]) -> int:
    if any(arg in ("-h", "--help") for arg in argv):
        print(__doc__)
        return 0
    scripts = sorted(HERE.glob("bench_*.py")) + [HERE / "validity" / "panel.py"]
    if argv:
        scripts = [s for s in scripts if any(name in s.stem for name in argv)]
    failed = 0
    for script in scripts:
        print(f"== {script.stem}", flush=True)
        failed += subprocess.call([sys.executable, str(script)]) != 0
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
