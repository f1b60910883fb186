"""JSON text of the command line's ``--json`` contract, shared by the CLI and the web API.

Decimals become numbers (integers when whole), dates and times ISO strings, tuples and sets
lists. Standard library only, so the CLI can use it without loading anything heavy.
"""

from __future__ import annotations

import json
from datetime import date, datetime
from decimal import Decimal
from typing import Any


def _default(value: Any) -> Any:
    if isinstance(value, Decimal):
        return float(value) if value != value.to_integral_value() else int(value)
    if isinstance(value, datetime | date):
        return value.isoformat()
    if isinstance(value, set | frozenset | tuple):
        return list(value)
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")


def dumps(data: Any, *, indent: int | None = 2) -> str:
    """JSON for the ``--json`` contract (Decimals as numbers, dates as ISO strings)."""
    return json.dumps(data, default=_default, indent=indent, ensure_ascii=False)
