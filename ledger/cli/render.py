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

    def invoke(self, ctx):
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


# Columns whose values are never cut or wrapped: what a reader scans a listing by.
KEEP_WHOLE = frozenset({"due", "earliest", "status", "kind", "system", "regime", "on", "id", "added on", "name"})
NARROWEST = 20  # a wrapping column is not squeezed below this many characters (else: stacked)
CELL_PAD = 2  # rich's padding between columns


def console_width() -> int:
    """Columns to lay out for: $COLUMNS if set, else the terminal's, else a wide piped layout."""
    import os

    from rich.console import Console

    if os.environ.get("COLUMNS", "").isdigit():
        return int(os.environ["COLUMNS"])
    # Piped output gets a fixed wide layout so that scripts and logs see whole values.
    return Console().width if sys.stdout.isatty() else PIPED_WIDTH


def table(headers: Sequence[str], rows: Iterable[Sequence[Any]], *, title: str | None = None) -> None:
    """A table on stdout that never cuts a value (rich, imported only when a table is shown).

    Long values wrap inside their column; the columns in ``KEEP_WHOLE`` (dates, status,
    system) are kept whole. When even that does not fit the width, each row is printed as a
    block of "column: value" lines instead.
    """
    from rich import box
    from rich.console import Console
    from rich.table import Table

    cells = [["" if v is None else str(v) for v in r] for r in rows]
    width = console_width()
    longest = [max([len(h), *(len(r[i]) for r in cells)]) for i, h in enumerate(headers)]
    keep = [h in KEEP_WHOLE for h in headers]
    needed = sum((n if k else min(n, NARROWEST)) + CELL_PAD for n, k in zip(longest, keep, strict=True))
    console = Console(width=width, soft_wrap=False)
    if needed > width:
        _stacked(console, headers, cells, keep, title, width)
        return
    t = Table(title=title, show_lines=False, header_style="bold", box=box.SIMPLE_HEAD, pad_edge=False)
    for h, n, k in zip(headers, longest, keep, strict=True):
        if k:
            t.add_column(h, no_wrap=True, min_width=n)
        else:
            t.add_column(h, overflow="fold", min_width=min(n, NARROWEST))
    for r in cells:
        t.add_row(*r)
    console.print(t)


def _stacked(console: Any, headers: Sequence[str], cells: list[list[str]], keep: list[bool], title: str | None,
             width: int) -> None:
    """Rows as blocks: the kept columns on one line, then every other column on its own lines."""
    import textwrap

    if title:
        console.print(title, style="bold", soft_wrap=True)
    for r in cells:
        head = "  ".join(v for v, k in zip(r, keep, strict=True) if k and v)
        console.print(head, style="bold", soft_wrap=True, highlight=False, markup=False)
        for h, v, k in zip(headers, r, keep, strict=True):
            if k or not v:
                continue
            for line in textwrap.wrap(f"{h}: {v}", width=max(width - 2, 20), subsequent_indent="    "):
                console.print("  " + line, soft_wrap=True, highlight=False, markup=False)
        console.print("")


LOCAL_RULES_NOTE = CAUTION  # the same caution every report carries
