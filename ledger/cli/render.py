"""Output helpers and the one place where user errors become a line on stderr and an exit code.

Exit codes: 0 success; 1 the command ran but found error-level problems (e.g. overdue
obligations with ``--fail-on-overdue``, a broken chain); 2 the request could not be carried
out (bad input, unknown name, schema behind). Bugs keep their traceback.
"""

from __future__ import annotations

import sys
from collections.abc import Iterable, Sequence
from typing import Any

import typer
from typer.core import TyperGroup

from ledger.errors import LedgerError
from ledger.exports.common import CAUTION
from ledger.jsontext import dumps

PIPED_WIDTH = 200  # columns used when stdout is not a terminal
EXIT_FINDINGS = 1
EXIT_USER_ERROR = 2


def fail(message: str) -> typer.Exit:
    """Print one line to stderr and return the Exit to raise."""
    typer.echo(f"error: {message}", err=True)
    return typer.Exit(code=EXIT_USER_ERROR)


class LedgerGroup(TyperGroup):
    """Typer group that turns every LedgerError raised below it into one line and exit 2."""

    def invoke(self, ctx):  # type: ignore[no-untyped-def]
        try:
            return super().invoke(ctx)
        except LedgerError as exc:
            raise fail(str(exc)) from None


def warn(message: str) -> None:
    """A warning line on stderr (the command still succeeds)."""
    typer.echo(message, err=True)


def print_json(data: Any) -> None:
    """Write JSON to stdout."""
    sys.stdout.write(dumps(data) + "\n")


def table(headers: Sequence[str], rows: Iterable[Sequence[Any]], *, title: str | None = None) -> None:
    """A plain table on stdout (rich, imported only when a table is shown)."""
    from rich import box
    from rich.console import Console
    from rich.table import Table

    # Piped output gets a fixed wide layout so that scripts and logs see whole values.
    console = Console() if sys.stdout.isatty() else Console(width=PIPED_WIDTH)
    t = Table(title=title, show_lines=False, header_style="bold", box=box.SIMPLE_HEAD, pad_edge=False)
    for i, h in enumerate(headers):
        last = i == len(headers) - 1
        t.add_column(h, no_wrap=not last, overflow="fold" if last else "ellipsis")
    for r in rows:
        t.add_row(*("" if v is None else str(v) for v in r))
    console.print(t)


LOCAL_RULES_NOTE = CAUTION  # the same caution every report carries
