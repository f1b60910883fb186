"""The tamper-evident hash chain over each system's events.

Every event row stores ``prev_hash`` (the ``chain_hash`` of the system's previous event, or
64 zeros for the first) and ``chain_hash = SHA-256(prev_hash + "\\n" + canonical)``, where
``canonical`` is the event's content as compact JSON with sorted keys (UTF-8, no ASCII
escaping). The chain is per system, so writers to different systems never wait on each
other. ``CANONICAL_FIELDS`` is the documented list (docs/integrity.md); changing it is a
new chain version and needs a migration.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from datetime import UTC, date, datetime
from typing import Any

GENESIS = "0" * 64
CHAIN_VERSION = 1  # bump when CANONICAL_FIELDS or their form change

# What the hash covers: the event's content, with every reference written as the natural key
# a person would read on a logbook (site/tag, technician name, certificate scheme and number,
# cylinder id, the voided event's own hash) rather than a database row id, so that a chain
# computed in one database holds in any other the records are moved or re-imported into.
# Not covered: the row id, the chain columns themselves and the import content key.
CANONICAL_FIELDS: tuple[str, ...] = (
    "system",  # "SITE/TAG"
    "kind",
    "performed_on",
    "recorded_at",
    "mass_ng",
    "refrigerant",
    "charge_ng",
    "result",
    "location",
    "method",
    "destination",
    "cylinder",  # cylinder id as marked on it
    "cylinder_before_ng",
    "cylinder_after_ng",
    "technician",  # name
    "certificate",  # "scheme|number" of the certificate valid on the day
    "recorded_by",
    "note",
    "voids",  # chain hash of the voided event
    "reason",
    "attachments",
    "reclaimed",
)


def _plain(value: Any) -> Any:
    if isinstance(value, datetime):
        # SQLite hands back naive UTC, PostgreSQL aware times: hash both the same way.
        aware = value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)
        return aware.isoformat(timespec="microseconds")
    if isinstance(value, date):
        return value.isoformat()
    if isinstance(value, bool):
        return int(value)
    return value


def canonical(row: Mapping[str, Any]) -> bytes:
    """The canonical bytes of an event's content.

    Args:
        row: a mapping holding ``CANONICAL_FIELDS`` with natural keys (missing ones count as
            null); ``repository.natural_keys`` adds them to an event row.
    Returns:
        Compact, key-sorted JSON as UTF-8 bytes.
    """
    body = {name: _plain(row.get(name)) for name in CANONICAL_FIELDS}
    body["v"] = CHAIN_VERSION
    return json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()


def link(prev_hash: str, row: Mapping[str, Any]) -> str:
    """The chain hash of ``row`` following ``prev_hash``."""
    return hashlib.sha256(prev_hash.encode() + b"\n" + canonical(row)).hexdigest()
