"""Layer guards: pure modules do no I/O, know no store and never read the clock (conventions §1)."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "ledger"
PURE = sorted(
    [
        *(PACKAGE / "domain").glob("*.py"),
        *(PACKAGE / "rules").glob("*.py"),
        *(PACKAGE / "reference").glob("*.py"),
        PACKAGE / "units.py",
        PACKAGE / "inputs.py",
    ]
)
FORBIDDEN_IMPORTS = ("sqlalchemy", "sqlmodel", "ledger.store", "ledger.services", "ledger.cli", "alembic")
CLOCK_CALLS = ("today", "now", "utcnow", "time")


@pytest.mark.parametrize("path", PURE, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_pure_module_imports_no_store_and_reads_no_clock(path: Path) -> None:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            names = [node.module or ""]
        else:
            names = []
        for name in names:
            assert not name.startswith(FORBIDDEN_IMPORTS), f"{path.name} imports {name}"
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute):
            owner = node.func.value
            owner_name = owner.id if isinstance(owner, ast.Name) else getattr(owner, "attr", "")
            if owner_name in ("date", "datetime", "time") and node.func.attr in CLOCK_CALLS:
                raise AssertionError(f"{path.name} reads the clock: {owner_name}.{node.func.attr}()")


def test_every_rules_module_has_a_test_file() -> None:
    tests = PACKAGE.parent / "tests" / "rules"
    for module in (PACKAGE / "rules").glob("*.py"):
        if module.name.startswith("_"):
            continue
        assert (tests / f"test_{module.name}").exists(), f"no tests/rules/test_{module.name}"


def test_no_print_outside_cli() -> None:
    for path in PACKAGE.rglob("*.py"):
        if "cli" in path.parts:
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id == "print":
                raise AssertionError(f"print() in {path.relative_to(PACKAGE)}")
