"""One function per command-line verb: arguments in, files and a short summary out, exit code back.

Only this module and `cli.py` print to standard output; messages and bars go to stderr
through `Feedback`.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from strataweave.workflow.progress import Feedback


def _default_out(*parts: str) -> Path:
    return Path("runs") / "_".join(parts)


def run_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    from strataweave.workflow.config import load_workflow
    from strataweave.workflow.runner import run_workflow

    flow = load_workflow(args.workflow).with_overrides(seed=args.seed, jobs=args.jobs)
    out = args.out or _default_out(args.workflow.stem)
    summary = run_workflow(flow, out, argv=["strataweave", *argv], feedback=feedback, overwrite=args.overwrite)
    feedback.say(summary)
    return 0


def evaluate_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    from strataweave.workflow.config import load_workflow
    from strataweave.workflow.runner import run_workflow

    flow = load_workflow(args.workflow, require_modalities=False).with_overrides(seed=args.seed)
    out = args.out or _default_out(args.workflow.stem, args.groups.stem)
    summary = run_workflow(
        flow, out, argv=["strataweave", *argv], feedback=feedback, overwrite=args.overwrite, groups_file=args.groups
    )
    feedback.say(summary)
    return 0


def check_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    from strataweave.workflow.checking import check_inputs

    print(check_inputs(args.workflow))
    return 0


def assign_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    from strataweave.caution import CAUTION
    from strataweave.files import guarded, write_table
    from strataweave.workflow.assign import assign_new_patients, check_table_out

    if args.out is not None:
        check_table_out(args.out, args.run_dir, dict(args.modality), force=args.force)
    table = assign_new_patients(args.run_dir, dict(args.modality))
    if args.out is None:
        print(f"# {CAUTION}")
        guarded(table).to_csv(sys.stdout, sep="\t", index=False, float_format="%.6g", lineterminator="\n")
    else:
        write_table(table, args.out, comment=CAUTION)
        feedback.say(f"assigned {len(table)} patients: {args.out}")
    return 0


def compare_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    from strataweave.workflow.comparison import compare_runs

    summary = compare_runs(args.run_a, args.run_b, args.out, force=args.force)
    print(summary)
    return 0


def report_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    import json

    from strataweave.report.contract import RESULTS_FILE
    from strataweave.workflow.outputs import render_report
    from strataweave.workflow.run_folder import finished_run

    folder = finished_run(args.run_dir)
    try:
        results = json.loads((folder.path / RESULTS_FILE).read_text(encoding="utf-8"))
        formats = results["report"]["formats"] or ["html", "pdf"]  # asked for now, even if the run wrote none
    except (OSError, ValueError, KeyError, TypeError):
        formats = ["html", "pdf"]
    render_report(folder.path, formats, feedback)
    feedback.say(f"report rendered: {folder.path}")
    return 0


def synth_command(args: argparse.Namespace, argv: list[str], feedback: Feedback) -> int:
    from strataweave.data.synthetic import write_synthetic_cohort

    written = write_synthetic_cohort(args.out_dir, n_patients=args.patients, seed=args.seed)
    feedback.say(f"wrote {len(written)} files of an invented cohort into {args.out_dir}")
    return 0
