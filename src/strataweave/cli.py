"""The `strataweave` command: parses arguments, calls `workflow`, maps errors to exit codes.

Exit codes: 0 done; 2 bad input or a bad path (one line naming it, no traceback); 3 a fault
of the machine (disk full, read-only, out of memory; nothing lost); 1 a fault of the program;
130 interrupted (run the same command again to resume). See `workflow.commands`.
"""

from __future__ import annotations

import argparse
import os
import sys
import traceback
import warnings
from pathlib import Path

from strataweave import __version__

EXAMPLES = {
    "run": "strataweave run workflows/synthetic_cohort.toml --out runs/demo --jobs 2",
    "check": "strataweave check workflows/synthetic_cohort.toml",
    "evaluate": "strataweave evaluate workflows/synthetic_cohort.toml --groups synthetic_cohort/planted_subtypes.tsv --out runs/planted",
    "assign": "strataweave assign runs/demo --modality rna=new_rna.tsv --modality protein=new_protein.tsv --out new_patients.tsv",
    "compare": "strataweave compare runs/demo runs/demo_seed7 --out runs/demo_vs_seed7",
    "report": "strataweave report runs/demo",
    "synth": "strataweave synth my_cohort --patients 400 --seed 2718",
}


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors and exit status 2, like every other bad input."""

    def error(self, message: str) -> None:
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def _positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"found {text!r}, expected a whole number >= 1") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"found {value}, expected a whole number >= 1")
    return value


def _seed(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"found {text!r}, expected a whole number >= 0") from None
    if not 0 <= value < 2**32:
        raise argparse.ArgumentTypeError(f"found {value}, expected a whole number from 0 to 2**32 - 1")
    return value


def _modality_file(text: str) -> tuple[str, str]:
    name, sep, path = text.partition("=")
    if not sep or not name.strip() or not path.strip():
        raise argparse.ArgumentTypeError(f"found {text!r}, expected NAME=PATH")
    return name.strip(), path.strip()


def _loudness_options(default: object) -> argparse.ArgumentParser:
    """-q / -v as a parent parser; the verbs' copy defaults to SUPPRESS so `-q run` stays quiet."""
    options = argparse.ArgumentParser(add_help=False)
    loudness = options.add_mutually_exclusive_group()
    loudness.add_argument("-q", "--quiet", action="store_true", default=default, help="no progress bars or messages")
    loudness.add_argument(
        "-v", "--verbose", action="store_true", default=default, help="one line per stage; tracebacks on faults"
    )
    return options


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of every verb (each --help ends with an example)."""
    shared = _loudness_options(argparse.SUPPRESS)
    parser = _Parser(
        prog="strataweave",
        description="Multi-omics patient stratification workbench (research use only).",
        epilog=f"example: {EXAMPLES['run']}",
        parents=[_loudness_options(False)],
    )
    parser.add_argument("--version", action="version", version=f"strataweave {__version__}")
    verbs = parser.add_subparsers(dest="verb", required=True, metavar="VERB", parser_class=_Parser)

    def verb(name: str, summary: str) -> argparse.ArgumentParser:
        return verbs.add_parser(
            name, help=summary, description=summary, parents=[shared], epilog=f"example: {EXAMPLES[name]}",
            formatter_class=argparse.RawDescriptionHelpFormatter,
        )

    run = verb("run", "run a workflow file and write a run folder")
    run.add_argument("workflow", type=Path, help="the TOML workflow file")
    run.add_argument("--out", type=Path, help="run folder to write (default: runs/<workflow name>)")
    run.add_argument("--jobs", type=_positive, help="parallel workers for the resamples (overrides the file)")
    run.add_argument("--seed", type=_seed, help="seed of the run (overrides the file)")
    run.add_argument("--overwrite", action="store_true", help="replace a finished run in --out")

    check = verb("check", "validate a workflow file and its inputs, print QC; runs nothing heavy")
    check.add_argument("workflow", type=Path, help="the TOML workflow file")

    evaluate = verb("evaluate", "test a grouping you bring (survival, clinical, markers) and write a run folder")
    evaluate.add_argument("workflow", type=Path, help="the TOML workflow file (modalities optional)")
    evaluate.add_argument("--groups", type=Path, required=True,
                          help="table: patient ID in the first column, group in the second")
    evaluate.add_argument("--out", type=Path, help="run folder to write (default: runs/<workflow>_<groups>)")
    evaluate.add_argument("--seed", type=_seed, help="seed of the run (overrides the file)")
    evaluate.add_argument("--overwrite", action="store_true", help="replace a finished run in --out")

    assign = verb("assign", "put newly profiled patients into the subtypes of a finished run")
    assign.add_argument("run_dir", type=Path, help="a finished run folder")
    assign.add_argument("--modality", type=_modality_file, action="append", required=True, metavar="NAME=PATH",
                        help="a matrix of new patients for modality NAME (repeat for each modality)")
    assign.add_argument("--out", type=Path, help="table to write (default: print to standard output)")
    assign.add_argument("--force", action="store_true", help="replace an existing --out file (never an input or a run's file)")

    compare = verb("compare", "compare the subtypes of two runs: ARI, NMI, contingency table, flow, a figure and an HTML page")
    compare.add_argument("run_a", type=Path, help="first run folder")
    compare.add_argument("run_b", type=Path, help="second run folder")
    compare.add_argument("--out", type=Path, help="folder for the comparison tables, figure and page (default: print only)")
    compare.add_argument("--force", action="store_true", help="replace comparison files already in --out")

    report = verb("report", "render report.html, slides.pdf and figures/ again from a run folder")
    report.add_argument("run_dir", type=Path, help="a finished run folder")

    synth = verb("synth", "write an invented multi-omics cohort with planted subtypes")
    synth.add_argument("out_dir", type=Path, help="folder to write the cohort files into")
    synth.add_argument("--patients", type=_positive, default=400, help="number of patients (default 400)")
    synth.add_argument("--seed", type=_seed, default=2718, help="generator seed (default 2718)")
    return parser


def _dispatch(args: argparse.Namespace, argv: list[str]) -> int:
    from strataweave.workflow import commands
    from strataweave.workflow.progress import NORMAL, QUIET, VERBOSE, Feedback

    feedback = Feedback(QUIET if args.quiet else VERBOSE if args.verbose else NORMAL)
    handler = getattr(commands, f"{args.verb}_command")
    with warnings.catch_warnings():
        if args.quiet:
            warnings.simplefilter("ignore")
        return handler(args, argv, feedback)


def main(argv: list[str] | None = None) -> int:
    """Entry point of the console script; returns the exit code."""
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as stop:
        return int(stop.code or 0)
    try:
        return _dispatch(args, argv)
    except BrokenPipeError:  # the reader of the output stopped early (e.g. `| head`): not a fault
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except KeyboardInterrupt:
        print(f"strataweave {args.verb}: interrupted; run the same command again to resume", file=sys.stderr)
        return 130
    except Exception as fault:
        from strataweave.workflow.commands import known_fault

        known = known_fault(fault)
        if known is not None:  # bad input, a bad path or a fault of the machine
            code, text = known
            print(f"strataweave {args.verb}: {'error' if code == 2 else 'stopped'}: {text}", file=sys.stderr)
            return code
        if args.verbose:
            traceback.print_exc()
        print(
            f"strataweave {args.verb}: internal error: {type(fault).__name__}: {fault} "
            "(a fault of the program, not of your input; rerun with --verbose for the traceback)",
            file=sys.stderr,
        )
        return 1

if __name__ == "__main__":
    sys.exit(main())
