"""workflows/REFERENCE.md is the reference `workflow_reference` generates from the section definitions."""

from __future__ import annotations

from dataclasses import fields
from pathlib import Path

from strataweave.workflow.config import REFERENCE_FILE, SECTIONS, ModalitySettings, workflow_reference

ROOT = Path(__file__).resolve().parents[2]


def test_the_reference_file_is_the_generated_one() -> None:
    written = (ROOT / REFERENCE_FILE).read_text(encoding="utf-8")
    assert written == workflow_reference(), f"regenerate it: python -m strataweave.workflow.config > {REFERENCE_FILE}"


def test_every_key_has_a_line_of_help_and_says_what_it_accepts() -> None:
    for cls in (ModalitySettings, *SECTIONS.values()):
        for spec in fields(cls):
            assert spec.metadata["doc"], f"{cls.__name__}.{spec.name} has no doc"
            assert spec.metadata["rule"].expected, f"{cls.__name__}.{spec.name}: its rule says nothing"
