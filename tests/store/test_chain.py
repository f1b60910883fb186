"""The chain's canonical form written directly equals its json.dumps definition, byte for byte."""

from __future__ import annotations

import hashlib
from datetime import UTC, date, datetime, timedelta, timezone

from hypothesis import given, settings
from hypothesis import strategies as st

from ledger.store import chain

_TEXT = st.one_of(st.none(), st.text(max_size=12))  # any unicode, quotes, controls, escapes
_MASS = st.one_of(st.none(), st.integers(0, 10**18))  # ng; fractional mg included
_MOMENT = st.datetimes(min_value=datetime(2000, 1, 1), max_value=datetime(2100, 1, 1))
_ZONE = st.sampled_from([None, UTC, timezone(timedelta(hours=-5)), timezone(timedelta(hours=5, minutes=30))])


@st.composite
def rows(draw: st.DrawFn) -> dict:
    row: dict = {name: draw(_TEXT) for name in chain.CANONICAL_FIELDS}
    for hashed, source in chain.LEGACY_MASS_KEYS.items():
        del row[hashed]
        row[source] = draw(_MASS)
    row["performed_on"] = draw(st.one_of(st.none(), st.dates()))
    moment = draw(_MOMENT)
    zone = draw(_ZONE)
    row["recorded_at"] = moment if zone is None else moment.replace(tzinfo=zone)  # SQLite naive, PG aware
    row["reclaimed"] = draw(st.one_of(st.none(), st.booleans()))
    for name in chain.OPTIONAL_FIELDS:
        if draw(st.booleans()):
            row[name] = draw(_TEXT)
    return row


@settings(max_examples=400)
@given(rows())
def test_canonical_is_byte_for_byte_the_json_definition(row: dict) -> None:
    # the definition: RFC 8259 JSON as Python's json.dumps writes it, keys sorted, compact,
    # UTF-8 without ASCII escaping (docs/integrity.md); common practice, no further source
    assert chain.canonical(row) == chain.canonical_by_json(row)


def test_a_known_row_keeps_its_hash() -> None:
    row = {"system": "DE-1/RACK", "kind": "add", "performed_on": date(2025, 3, 14),
           "recorded_at": datetime(2025, 3, 14, 9, 30, tzinfo=UTC), "mass_ng": 2_500_000_000_000,
           "technician": "Ada Novak", "note": "Füllung \"Nord\"", "reclaimed": False}
    assert chain.canonical(row) == chain.canonical_by_json(row)
    expected = hashlib.sha256(chain.GENESIS.encode() + b"\n" + chain.canonical_by_json(row)).hexdigest()
    assert chain.link(chain.GENESIS, row) == expected
