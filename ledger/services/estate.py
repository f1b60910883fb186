"""Estate-wide views built set-based: one load of the needed rows, then pure computation."""

from __future__ import annotations

from typing import Any

from ledger.domain.booking import book
from ledger.reference import load_reference
from ledger.services.recording import site_today
from ledger.store import repository as repo
from ledger.store.db import Database
from ledger.units import format_mass, ng_to_kg


def systems_overview(db: Database, *, site_code: str | None = None) -> list[dict[str, Any]]:
    """Every system (or one site's) with refrigerant, charge and CO2e today."""
    from ledger.exports.common import TONNES, fmt
    from ledger.services.reporting import charge_co2e_t, site_basis

    reference = load_reference()
    with db.read() as conn:
        histories = repo.load_histories(site_code, conn=conn)
    rows = []
    for h in histories:
        state = book(h).state(site_today(h.site.timezone))
        basis = site_basis(h.site)
        co2e = None
        if state.refrigerant:
            co2e = charge_co2e_t(state.full_charge_ng, reference.gwp(state.refrigerant, basis).value)
        rows.append(
            {
                "site": h.site.code,
                "tag": h.system.tag,
                "application": h.system.application.value,
                "refrigerant": state.refrigerant,
                "full_charge_kg": ng_to_kg(state.full_charge_ng),
                "charge": format_mass(state.full_charge_ng, h.site.mass_unit, 1),
                "gwp_basis": basis,
                "co2e_t": co2e,
                "co2e_t_display": fmt(co2e, TONNES),
                "in_service": state.in_service,
            }
        )
    return rows
