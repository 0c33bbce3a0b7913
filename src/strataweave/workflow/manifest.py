"""What `manifest.json` records: versions, platform, the workflow text, input hashes, seeds, stages."""

from __future__ import annotations

import hashlib
import platform
import sys
from datetime import datetime, timezone
from importlib import metadata

from strataweave import __version__
from strataweave.caution import CAUTION
from strataweave.files import sha256_file
from strataweave.workflow.config import Workflow
from strataweave.workflow.run_folder import RUN_FORMAT

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


def now_text() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


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
