"""The global options of a run (``--db``) and the database they open."""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from ledger.store.db import Database, Location

_options: dict[str, str | None] = {"db": None}


def set_db(value: str | None) -> None:
    """Remember the ``--db`` option for this run."""
    _options["db"] = value


def location() -> Location:
    """Where this run's database is."""
    from ledger.store.db import locate

    return locate(_options["db"])


def open_db() -> Database:
    """Open this run's database (checked against the migration head on first use)."""
    from ledger.store.db import Database

    return Database(location())
