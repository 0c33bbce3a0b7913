"""Fixtures of the workflow tests."""

from __future__ import annotations

from pathlib import Path

import pytest
from workflow_files import write_tiny_files


@pytest.fixture
def tiny_files(tmp_path: Path) -> Path:
    """A folder with an invented clinical table, one small matrix and a minimal workflow."""
    return write_tiny_files(tmp_path)
