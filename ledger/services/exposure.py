"""Servicing bans and transition exposure across the estate (`refledger exposure`)."""

from __future__ import annotations

from datetime import date
from decimal import Decimal
from typing import Any

from ledger.store import repository as repo
from ledger.store.db import Database

_PLACES = Decimal("0.001")


def _q(value: Decimal | None) -> Decimal | None:
    return None if value is None else value.quantize(_PLACES)


def exposure_view(db: Database, *, as_of: date, site_code: str | None = None) -> dict[str, Any]:
    """Systems a servicing prohibition catches on or after ``as_of``, with the CO2e at stake.

    Returns:
        {"as_of", "rows": [...], "totals": {regime: {...}}}; masses in kg and CO2e in t,
        rounded half-even to 3 places for display (exact figures stay in the rules).
    """
    from ledger.reference import load_reference
    from ledger.reference.servicing import load_retrofits, load_servicing
    from ledger.rules.servicing import exposure

    with db.read() as conn:
        histories = repo.load_histories(site_code, conn=conn)
    found = exposure(histories, load_reference(), load_servicing(), load_retrofits(), as_of)
    rows = []
    totals: dict[str, dict[str, Any]] = {}
    for e in found:
        rows.append({
            "site": e.site_code, "system": e.tag, "regime": e.regime, "rule": e.ban.code,
            "what": e.ban.what, "from_on": e.ban.from_on, "in_force": e.in_force,
            "refrigerant_use": e.ban.refrigerant_use, "refrigerant": e.refrigerant,
            "gwp": e.gwp.normalize(), "charge_kg": _q(e.charge_kg), "co2e_t": _q(e.co2e_t),
            "retrofit_to": e.retrofit,
            "retrofit_gwp": None if e.retrofit_gwp is None else e.retrofit_gwp.normalize(),
            "saved_t": _q(e.saved_t), "citation": e.ban.citation,
            "confidence": e.ban.confidence, "note": e.ban.note,
        })
        t = totals.setdefault(e.regime, {"systems": set(), "charge_kg": Decimal(0),
                                         "co2e_t": Decimal(0), "saved_t": Decimal(0)})
        if (e.site_code, e.tag) not in t["systems"]:
            t["systems"].add((e.site_code, e.tag))
            t["charge_kg"] += e.charge_kg
            t["co2e_t"] += e.co2e_t
            t["saved_t"] += e.saved_t or 0
    return {
        "as_of": as_of,
        "rows": rows,
        "totals": {r: {"systems": len(t["systems"]), "charge_kg": _q(t["charge_kg"]),
                       "co2e_t": _q(t["co2e_t"]), "saved_t": _q(t["saved_t"])}
                   for r, t in sorted(totals.items())},
    }
