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
from decimal import Decimal
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
    "mass_mg",  # ng-rename: keep (hashed name; exact mg value of *_ng)
    "refrigerant",
    "charge_mg",  # ng-rename: keep (hashed name; exact mg value of *_ng)
    "result",
    "location",
    "method",
    "destination",
    "cylinder",  # cylinder id as marked on it
    "cylinder_before_mg",  # ng-rename: keep (hashed name; exact mg value of *_ng)
    "cylinder_after_mg",  # ng-rename: keep (hashed name; exact mg value of *_ng)
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


# Masses are stored in nanograms but hashed under their first names with the exact milligram
# value (an int when whole, else a plain decimal string such as "453592.37"), so chains
# written when the ledger kept milligrams still verify and a pound entry hashes exactly.
# Hashed key -> the row's key.
LEGACY_MASS_KEYS: Mapping[str, str] = {
    "mass_mg": "mass_ng",  # ng-rename: keep
    "charge_mg": "charge_ng",  # ng-rename: keep
    "cylinder_before_mg": "cylinder_before_ng",  # ng-rename: keep
    "cylinder_after_mg": "cylinder_after_ng",  # ng-rename: keep
}
# Fields added after chains were first written: hashed only when not null, so every event
# recorded before they existed keeps its hash (docs/integrity.md).
OPTIONAL_FIELDS: tuple[str, ...] = (
    "facility",  # EU 2024/573 Art 6(c): recycling/reclamation/destruction facility, name and address
    "facility_certificate",  # ... and its certificate number, where applicable
)
# ng-rename: off (milligrams on purpose, to the end marker below)
_NG_PER_MG = 1_000_000


def legacy_mg(ng: int | None) -> int | str | None:
    """The exact milligram figure of a nanogram mass, as the canonical form writes it."""
    if ng is None:
        return None
    whole, rest = divmod(int(ng), _NG_PER_MG)
    if rest == 0:
        return whole
    return format(Decimal(int(ng)) / _NG_PER_MG, "f")


def hashed_body(row: Mapping[str, Any]) -> dict[str, Any]:
    """The JSON object the chain hashes for an event row: plain values under hashed keys.

    Args:
        row: a mapping holding the row keys of ``CANONICAL_FIELDS`` (masses under their
            ``*_ng`` names, see ``LEGACY_MASS_KEYS``) with natural keys, and optionally
            ``OPTIONAL_FIELDS``; missing ones count as null.
    """
    body: dict[str, Any] = {}
    for name in CANONICAL_FIELDS:
        source = LEGACY_MASS_KEYS.get(name)
        body[name] = _plain(row.get(name)) if source is None else legacy_mg(row.get(source))
    # ng-rename: on
    for name in OPTIONAL_FIELDS:
        value = _plain(row.get(name))
        if value is not None:
            body[name] = value
    body["v"] = CHAIN_VERSION
    return body


def canonical(row: Mapping[str, Any]) -> bytes:
    """The canonical bytes of an event's content.

    Args:
        row: as for ``hashed_body``; ``repository.natural_keys`` adds the natural keys to an
            event row.
    Returns:
        Compact, key-sorted JSON as UTF-8 bytes: byte for byte ``json.dumps(hashed_body(row),
        sort_keys=True, separators=(",", ":"), ensure_ascii=False)`` (tests/store/test_chain.py
        holds them equal), written directly because `verify` and every report hash each event
        of their scope.
    """
    parts = []
    for key, name, source, optional in _SORTED_FIELDS:
        if source is not None:
            text = _json(legacy_mg(row.get(source)))
        elif name == "v":
            text = _VERSION_TEXT
        else:
            value = row.get(name)
            if value is None:
                if optional:
                    continue
                text = "null"
            else:
                text = _json(value)
        parts.append(key + text)
    return ("{" + ",".join(parts) + "}").encode()


def canonical_by_json(row: Mapping[str, Any]) -> bytes:
    """``canonical`` through ``json.dumps`` of ``hashed_body``: the definition it is held to."""
    return json.dumps(hashed_body(row), sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()


_quote = json.encoder.encode_basestring  # a str as json.dumps(..., ensure_ascii=False) writes it
# hashed_body's keys in sorted order: (key text, row key, row key of a mass or None, optional)
_SORTED_FIELDS = tuple(
    (_quote(name) + ":", name, LEGACY_MASS_KEYS.get(name), name in OPTIONAL_FIELDS)
    for name in sorted((*CANONICAL_FIELDS, *OPTIONAL_FIELDS, "v"))
)
_VERSION_TEXT = str(CHAIN_VERSION)


def _json(value: Any) -> str:
    """One plain value (after ``_plain``) as the canonical JSON writes it."""
    kind = type(value)
    if value is None:
        return "null"
    if kind is str:
        return _quote(value)
    if kind is int:
        return int.__repr__(value)
    if kind is date:
        return '"' + value.isoformat() + '"'
    if kind is datetime:
        aware = value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)
        return '"' + aware.isoformat(timespec="microseconds") + '"'  # as _plain: ISO text needs no escape
    if kind is bool:
        return "1" if value else "0"  # as _plain: a flag hashes as 0 or 1
    return json.dumps(_plain(value), sort_keys=True, separators=(",", ":"), ensure_ascii=False)


def link(prev_hash: str, row: Mapping[str, Any]) -> str:
    """The chain hash of ``row`` following ``prev_hash``."""
    return hashlib.sha256(prev_hash.encode() + b"\n" + canonical(row)).hexdigest()
