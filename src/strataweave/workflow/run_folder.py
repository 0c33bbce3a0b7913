"""The run folder: recognise it, refuse what is not one, never overwrite a finished run unasked.

A folder is a run folder when its `manifest.json` carries our format marker. The manifest
says whether the run finished. A run is built in a hidden sibling folder that is renamed
into place only when it finishes; an interrupted one stays there and is resumed by running
the same command again.

Sections: the folder and its life (staging, lock, publishing, finished runs, new files
beside them), what `manifest.json` records, and `warnings.log`.
"""

from __future__ import annotations

import fcntl
import hashlib
import json
import os
import platform
import shutil
import sys
import warnings
from collections import Counter
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from datetime import datetime, timezone
from importlib import metadata
from pathlib import Path

from strataweave import __version__
from strataweave.caution import CAUTION
from strataweave.errors import InputError
from strataweave.files import atomic_write_text, sha256_file
from strataweave.workflow.config import Workflow

# ---------------------------------------------------------------------------------------------
# The folder and its life
# ---------------------------------------------------------------------------------------------

RUN_FORMAT = "strataweave run folder"
MANIFEST = "manifest.json"
LOCK = ".lock"
LEFT_OUT = "left_out_patients.tsv"  # patients a grouping brought to `evaluate` leaves out, with why
OUTPUTS = (
    "results.json", "assignments.tsv", LEFT_OUT, "rank_selection.tsv", "survival.tsv", "clinical.tsv",
    "clinical_summary.tsv",
    "enrichment.tsv", "enrichment_rank_test.tsv", "report.html", "slides.pdf", "stages/figure_data.npz", "markers",
    "model", "figures",
)


class RunFolder:
    """Paths and manifest of one run folder."""

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)

    @property
    def stages(self) -> Path:
        return self.path / "stages"

    @property
    def manifest_path(self) -> Path:
        return self.path / MANIFEST

    def read_manifest(self) -> dict | None:
        """The manifest if this is one of our run folders, else None."""
        try:
            manifest = json.loads(self.manifest_path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        if not isinstance(manifest, dict) or manifest.get("format") != RUN_FORMAT:
            return None
        return manifest

    def write_manifest(self, manifest: dict) -> None:
        atomic_write_text(self.manifest_path, json.dumps(manifest, indent=2) + "\n")

    def clear_outputs(self) -> None:
        """Remove what an earlier run wrote here (never the stage cache), so nothing stale stays."""
        for name in OUTPUTS:
            path = self.path / name
            if path.is_dir():
                shutil.rmtree(path)
            else:
                path.unlink(missing_ok=True)


def staging_folder(out: Path) -> RunFolder:
    """The hidden sibling of `out` a run is built in until it finishes (kept for resuming)."""
    return RunFolder(out.parent / f".{out.name}.running")


def prepare_run_folder(path: str | Path, overwrite: bool = False) -> RunFolder:
    """The staging folder for a run into `path` (new, empty, unfinished or, if asked, finished); creates nothing."""
    out = Path(path).expanduser().resolve()
    folder = RunFolder(out)
    if out.exists() and not out.is_dir():
        raise InputError(f"{out}: exists and is not a folder, expected a new or run folder for --out")
    if out.is_dir() and any(out.iterdir()):
        manifest = folder.read_manifest()
        if manifest is None:
            raise InputError(f"{out}: folder is not empty and has no run manifest, expected a new, empty or run folder for --out")
        if manifest.get("status") == "finished" and not overwrite:
            raise InputError(f"{out}: holds a finished run, expected a new folder (or pass --overwrite to replace it)")
    return staging_folder(out)


def start_staging(staging: RunFolder) -> Path | None:
    """Create the staging folder and missing parents: the top-most folder created, None if it was there (to resume)."""
    top = staging.path
    while not top.parent.exists():
        top = top.parent
    try:
        staging.path.mkdir(parents=True)
    except (FileExistsError, NotADirectoryError):
        if not staging.path.is_dir():
            raise InputError(f"{staging.path.parent}: a file is in the way, expected folders down to --out") from None
        return None
    return top


def seed_cache(staging: RunFolder, out: Path) -> None:
    """Start the staging stage cache from the one of a run already at `out`, if any."""
    earlier = RunFolder(out).stages
    if earlier.is_dir():
        shutil.copytree(earlier, staging.stages)
    staging.stages.mkdir(exist_ok=True)


def now_text() -> str:
    """The time now (UTC, to the second) as ISO 8601 text."""
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


@contextmanager
def run_lock(folder: RunFolder, notice: Callable[[str], None]) -> Iterator[None]:
    """Hold an OS lock on `folder` (PID and start time in its lock file); refuse if another process holds it."""
    path = folder.path / LOCK
    with open(path, "a+", encoding="utf-8") as handle:
        handle.seek(0)
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise InputError(
                f"{folder.path}: locked by {handle.read().strip() or 'another process'}, expected no other run into this --out"
            ) from None
        earlier = handle.read().strip()
        if earlier:
            notice(f"{folder.path}: taking over the lock of {earlier}, which is no longer running")
        handle.truncate(0)
        handle.write(f"PID {os.getpid()} started {now_text()}\n")
        handle.flush()
        try:
            yield
        finally:
            path.unlink(missing_ok=True)


def publish(staging: RunFolder, out: Path) -> None:
    """Move the finished staging folder to `out`; an earlier run there is replaced only now."""
    (staging.path / LOCK).unlink()
    if out.exists():
        retired = out.parent / f".{out.name}.replaced"
        shutil.rmtree(retired, ignore_errors=True)
        out.rename(retired)
        staging.path.rename(out)
        shutil.rmtree(retired)
    else:
        staging.path.rename(out)


def finished_run(path: str | Path) -> RunFolder:
    """An existing, finished run folder to read from (assign, compare, report)."""
    folder = RunFolder(Path(path).expanduser().resolve())
    manifest = folder.read_manifest()
    if manifest is None:
        raise InputError(f"{folder.path}: no run manifest found, expected a run folder written by 'strataweave run'")
    if manifest.get("status") != "finished":
        raise InputError(
            f"{folder.path}: manifest status is {manifest.get('status')!r}, expected 'finished' (rerun the command to finish it)"
        )
    return folder


def _same_file(a: Path, b: Path) -> bool:
    return a == b or (a.exists() and b.exists() and a.samefile(b))


def check_new_file(path: str | Path, inputs: list[str | Path], force: bool = False) -> None:
    """Refuse to write `path` over an input or inside a finished run folder, or over an existing file unless `force`."""
    target = Path(path).expanduser().resolve()
    if any(_same_file(target, Path(name).expanduser().resolve()) for name in inputs if name):
        raise InputError(f"{path}: is an input of this command or of the run, expected a new file for --out")
    for parent in target.parents:
        if (RunFolder(parent).read_manifest() or {}).get("status") == "finished":
            raise InputError(f"{path}: is inside the finished run folder {parent}, expected a path outside any run folder")
    if target.is_dir():
        raise InputError(f"{path}: is a folder, expected a file path for --out")
    if target.exists() and not force:
        raise InputError(f"{path}: already exists, expected a new file (or pass --force to replace it)")


# ---------------------------------------------------------------------------------------------
# What `manifest.json` records: versions, platform, the workflow text, input hashes, seeds, stages.
# ---------------------------------------------------------------------------------------------

PACKAGES = (
    "numpy", "scipy", "scikit-learn", "pandas", "lifelines", "statsmodels",
    "matplotlib", "joblib", "tqdm", "jinja2", "threadpoolctl", "dask", "distributed", "pyarrow",
)


def package_versions() -> dict[str, str]:
    """Installed versions of the libraries a run may use ('not installed' where absent)."""
    versions = {"strataweave": __version__}
    for name in PACKAGES:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "not installed"
    return versions


def input_hashes(flow: Workflow) -> dict[str, str]:
    """sha256 of every input file the workflow names, by label (clinical, modality:<name>, ...)."""
    return {label: sha256_file(path) for label, path in flow.input_files().items()}


def new_manifest(flow: Workflow, verb: str, argv: list[str], hashes: dict[str, str], seeds: dict[str, int]) -> dict:
    """The manifest of a run that is starting: status 'running', no stages yet.

    `hashes` are the input sha256 by label (see `input_hashes`); the manifest keys them by path.
    """
    paths = flow.input_files()
    return {
        "format": RUN_FORMAT,
        "status": "running",
        "caution": CAUTION,
        "verb": verb,
        "command": list(argv),
        "created": now_text(),
        "finished": None,
        "strataweave_version": __version__,
        "python": sys.version.split()[0],
        "platform": platform.platform(),
        "packages": package_versions(),
        "workflow": {
            "path": str(flow.source),
            "sha256": hashlib.sha256(flow.text.encode("utf-8")).hexdigest(),
            "text": flow.text,
        },
        "inputs": {str(paths[label]): digest for label, digest in hashes.items()},
        "seed": flow.seed,
        "seeds": seeds,
        "stages": {},
    }


# ---------------------------------------------------------------------------------------------
# Warnings of the libraries a run uses, kept out of the terminal: counted, written to warnings.log.
#
# NumPy, scikit-learn, pandas and friends warn about things a user of the run cannot act on
# while the bars are drawn (a division by zero in a filtered-out feature, a fit that stopped
# at its iteration limit). A run collects them, writes one line per distinct warning with how
# often it came to `warnings.log` in the run folder, and says so in one line at the end.
# ---------------------------------------------------------------------------------------------

LOG = "warnings.log"


@contextmanager
def collected_warnings() -> Iterator[Counter]:
    """Every warning raised inside the block, counted by (category, message, where), none shown."""
    counts: Counter = Counter()

    def count(message, category, filename, lineno, file=None, line=None) -> None:
        counts[(category.__name__, " ".join(str(message).split()), f"{filename}:{lineno}")] += 1

    with warnings.catch_warnings():
        warnings.simplefilter("always")
        warnings.showwarning = count
        yield counts


def write_warnings_log(folder: Path, counts: Counter) -> str | None:
    """`folder`/warnings.log, most frequent first, and the line that tells of it; None when nothing warned."""
    if not counts:
        return None
    lines = [f"# {CAUTION}", "# count\tcategory\tmessage\twhere"]
    lines += [f"{n}\t{category}\t{message}\t{where}" for (category, message, where), n in counts.most_common()]
    atomic_write_text(Path(folder) / LOG, "\n".join(lines) + "\n")
    kinds = Counter(category for category, _, _ in counts.elements())
    named = ", ".join(f"{n} {category}" for category, n in kinds.most_common())
    total = sum(counts.values())
    return f"{total} library warning{'' if total == 1 else 's'} ({named}) written to {LOG}, not shown"
