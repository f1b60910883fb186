"""Typed views of SQLAlchemy results, so the store's queries type-check without casts.

Our tables are Core `Table` objects: their columns are `Column[Any]`, so a query's rows hold
`Any`. Two spots in SQLAlchemy's annotations need a hand:

- a `Row` of unknown width unpacks as `object` under mypy (`for a, b in conn.execute(...)`),
  although it is a tuple of `Any`; `tuples` hands the same rows on as `tuple[Any, ...]`.
- `CursorResult.inserted_primary_key` is `Optional` (it is None for statements that insert
  no row); `inserted_id` runs a single-row INSERT and returns its new id.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

from sqlalchemy import Connection, Insert, Result


def tuples(result: Result[*tuple[Any, ...]]) -> Iterator[tuple[Any, ...]]:
    """The rows of `result`, unchanged (a `Row` is a tuple), typed as plain tuples."""
    return iter(result)


def inserted_id(conn: Connection, stmt: Insert) -> int:
    """Run a single-row INSERT and return the primary key of the row it made."""
    key = conn.execute(stmt).inserted_primary_key
    if key is None:  # only a statement that inserts no row has no key
        raise ValueError("the INSERT made no row")
    return int(key[0])
