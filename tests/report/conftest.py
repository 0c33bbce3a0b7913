"""Fixtures of the report tests."""

from pathlib import Path

import pytest
from report_fixture import make_results, write_run_folder


@pytest.fixture
def run_folder(tmp_path: Path) -> Path:
    """A complete invented run folder (survival, markers, enrichment)."""
    results, arrays = make_results()
    return write_run_folder(tmp_path / "run", results, arrays)
