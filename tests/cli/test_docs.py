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
