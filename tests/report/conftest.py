"""Fixtures of the report tests: invented run folders, one of them rendered once per session."""

from pathlib import Path

import pytest
from report_fixture import (
    HOSTILE_CLINICAL,
    HOSTILE_MODALITIES,
    HOSTILE_PREFIX,
    HOSTILE_TITLE,
    make_results,
    write_run_folder,
)

from strataweave.report import render_run


@pytest.fixture(scope="session")
def rendered(tmp_path_factory) -> Path:
    """A complete run folder with hostile user strings, rendered to figures, HTML and PDF once."""
    results, arrays = make_results(modality_names=HOSTILE_MODALITIES, feature_prefix=HOSTILE_PREFIX,
                                   title=HOSTILE_TITLE, clinical_name=HOSTILE_CLINICAL)
    root = write_run_folder(tmp_path_factory.mktemp("hostile") / "run", results, arrays)
    render_run(root)
    return root


@pytest.fixture(scope="session")
def page(rendered) -> str:
    return (rendered / "report.html").read_text(encoding="utf-8")
