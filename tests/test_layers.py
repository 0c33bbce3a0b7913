"""The layer rule of DESIGN.md, read from the import statements of every module."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "strataweave"
NUMERIC = ("data", "graph", "factorize", "subtypes", "evaluate")
ABOVE = ("report", "workflow", "cli", "api")


def imported(path: Path) -> set[str]:
    """The strataweave sub-packages a module imports (first name after `strataweave.`)."""
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        names = [a.name for a in node.names] if isinstance(node, ast.Import) else (
            [node.module] if isinstance(node, ast.ImportFrom) and node.module else [])
        found |= {name.split(".")[1] for name in names if name.startswith("strataweave.")}
    return found


@pytest.mark.parametrize("layer", NUMERIC)
def test_numeric_layers_never_import_the_layers_above(layer):
    for module in (PACKAGE / layer).glob("*.py"):
        upward = imported(module) & set(ABOVE)
        assert not upward, f"{module.name} imports {sorted(upward)}"
        if layer == "evaluate":
            assert not imported(module) & {"graph", "factorize"}, module.name


#: The modules of `workflow/` in the order of `workflow/__init__.py`: each imports only those before it.
WORKFLOW_MODULES = ("config", "progress", "cache", "stages", "run_folder", "outputs", "commands")


def test_workflow_has_few_modules_each_importing_only_those_before_it():
    folder = PACKAGE / "workflow"
    assert {path.stem for path in folder.glob("*.py")} == {"__init__", *WORKFLOW_MODULES}  # issue 12: at most 8
    for position, name in enumerate(WORKFLOW_MODULES):
        tree = ast.parse((folder / f"{name}.py").read_text(encoding="utf-8"))
        used = {node.module.split(".")[2] for node in ast.walk(tree) if isinstance(node, ast.ImportFrom)
                and node.module and node.module.startswith("strataweave.workflow.")}
        assert used <= set(WORKFLOW_MODULES[:position]), f"{name} imports {sorted(used - set(WORKFLOW_MODULES[:position]))}"
