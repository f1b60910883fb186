"""Documentation stays true: help text for every command, docs/cli.md current, a page per regime."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from ledger.cli.reference import command_paths, help_text
from ledger.rules import REGIMES

ROOT = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize("path", command_paths(), ids=lambda p: " ".join(p) or "refledger")
def test_every_command_has_help(path: list[str]) -> None:
    text = help_text(path)
    assert "Usage:" in text
    lines = [line for line in text.splitlines() if line.strip()]
    assert len(lines) >= 3


def test_cli_reference_is_current() -> None:
    done = subprocess.run(
        [sys.executable, "-m", "cogapp", "--check", str(ROOT / "docs" / "cli.md")],
        capture_output=True,
        text=True,
        cwd=ROOT,
    )
    assert done.returncode == 0, "docs/cli.md is stale: run `.venv/bin/cog -r docs/cli.md`\n" + done.stderr


@pytest.mark.parametrize("page", [*(f"rules/{code}.md" for code in sorted(REGIMES)), "exposure.md"])
def test_generated_rule_tables_are_current(page: str) -> None:
    # docs/rules/<code>.md and docs/exposure.md embed tables cog builds from the constants and
    # data the engine uses (ledger.cli.reference), so `refledger rules` and the docs agree.
    text = (ROOT / "docs" / page).read_text(encoding="utf-8")
    assert "[[[cog" in text, f"docs/{page} has no generated table"
    done = subprocess.run(
        [sys.executable, "-m", "cogapp", "--check", str(ROOT / "docs" / page)],
        capture_output=True, text=True, cwd=ROOT,
    )
    assert done.returncode == 0, f"docs/{page} is stale: run `.venv/bin/cog -r docs/{page}`\n" + done.stderr


def test_rules_command_and_rule_pages_agree() -> None:
    from ledger.services.queries import rules_view

    for view in rules_view():
        text = (ROOT / "docs" / "rules" / f"{view['code']}.md").read_text(encoding="utf-8")
        assert f"Rule version `{view['version']}`" in text
        for c in view["constants"]:
            assert f"| {c['name']} |" in text, (view["code"], c["name"])


def test_every_command_is_in_the_reference() -> None:
    text = (ROOT / "docs" / "cli.md").read_text(encoding="utf-8")
    for path in command_paths():
        assert f"`{' '.join(['refledger', *path])}`" in text


@pytest.mark.parametrize("code", sorted(REGIMES))
def test_every_regime_has_a_page(code: str) -> None:
    assert (ROOT / "docs" / "rules" / f"{code}.md").exists()


def test_every_readme_link_exists() -> None:
    import re

    text = (ROOT / "README.md").read_text(encoding="utf-8")
    for target in re.findall(r"\]\(([^)#]+)\)", text):
        if "://" not in target:
            assert (ROOT / target).exists(), target
