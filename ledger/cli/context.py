"""The global options of a run (``--db``), the database they open, and the collector pause.

Startup of a run (imports, building the command) creates many long-lived objects and next to
no garbage; Python's cyclic collector would scan them over and over while they are made, and
once more at exit (tens of milliseconds a run). ``main()`` therefore pauses the collector.
The first use of the database (``location()``, also through ``open_db()``) comes after the
command has imported what it works with; it imports the database driver too, then freezes
what startup built, so that no later scan visits it, and turns the collector back on for the
real work. Objects that hold resources (engines, connections, files) are made after that point
and are finalised at exit as before. A command that does long work without this run's
database calls ``resume_collector()`` itself.
"""

from __future__ import annotations

import gc
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from ledger.store.db import Database, Location

_options: dict[str, str | None] = {"db": None}
_collector = {"paused": False}


def pause_collector() -> None:
    """Turn the cyclic garbage collector off for startup (the console entry point calls this)."""
    if gc.isenabled():
        gc.disable()
        _collector["paused"] = True


def resume_collector(*, freeze: bool = True) -> None:
    """End the startup pause: what exists now stays out of later scans; the collector is back on.

    ``freeze=False`` (the end of a run that never got here) only turns the collector back on.
    """
    if _collector["paused"]:
        _collector["paused"] = False
        if freeze:
            gc.freeze()
        gc.enable()


def set_db(value: str | None) -> None:
    """Remember the ``--db`` option for this run."""
    _options["db"] = value


def location() -> Location:
    """Where this run's database is."""
    from ledger.store.db import locate

    found = locate(_options["db"])
    if _collector["paused"]:
        _load_driver(found.url)
    resume_collector()
    return found


def _load_driver(url: str) -> None:
    """Import the database driver while startup lasts (psycopg is a large import).

    Only an import: a URL or driver that does not work is left for the engine to report.
    """
    try:
        from sqlalchemy.engine import make_url

        make_url(url).get_dialect().import_dbapi()
    except Exception:  # reported, as before, when the engine is made
        return


def open_db() -> Database:
    """Open this run's database (checked against the migration head on first use)."""
    from ledger.store.db import Database

    return Database(location())
