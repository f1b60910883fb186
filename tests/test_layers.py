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


def _imports(path: Path) -> set[str]:
    """Every ledger module a file imports, at module level or inside a function (a lazy import
    is still a dependency)."""
    found: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            found.update(f"{node.module}.{a.name}" for a in node.names)
            found.add(node.module)
        elif isinstance(node, ast.Import):
            found.update(a.name for a in node.names)
    return {name for name in found if name.startswith("ledger")}


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


@pytest.mark.parametrize("layer", ["exports", "store"])
def test_lower_layers_never_import_services_cli_or_web(layer: str) -> None:
    # conventions §1: cli -> services -> {rules, store, exports} -> {domain, units, reference}
    for path in (PACKAGE / layer).rglob("*.py"):
        for name in _imports(path):
            assert not name.startswith(("ledger.services", "ledger.cli", "ledger.web")), (
                f"{path.relative_to(PACKAGE)} imports {name}")


def test_services_import_no_cycle() -> None:
    # A circle between two services (even through a lazy import) means neither can be read or
    # changed alone; shared pieces belong in a lower module (services/rows.py, services/kept.py).
    modules = {_module_name(p): p for p in (PACKAGE / "services").glob("*.py")}
    graph = {name: {m for m in _imports(path) if m in modules and m != name} for name, path in modules.items()}
    done: set[str] = set()

    def visit(name: str, trail: list[str]) -> None:
        if name in trail:
            raise AssertionError("services import each other in a circle: " + " -> ".join(
                [*trail[trail.index(name):], name]))
        if name in done:
            return
        for dep in sorted(graph[name]):
            visit(dep, [*trail, name])
        done.add(name)

    for name in sorted(graph):
        visit(name, [])
