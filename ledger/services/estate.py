"""Estate-wide views built set-based: one load of the needed rows, then pure computation."""

from __future__ import annotations

from typing import Any

from ledger.domain.state import state_of
from ledger.reference import load_reference, round_half_up
from ledger.services.recording import site_today
from ledger.store import repository as repo
from ledger.store.db import Database
from ledger.units import format_mass, ng_to_kg


def systems_overview(db: Database, *, site_code: str | None = None) -> list[dict[str, Any]]:
    """Every system (or one site's) with refrigerant, charge and CO2e today."""
    from ledger.rules import REGIMES

    reference = load_reference()
    with db.read() as conn:
        histories = repo.load_histories(site_code, conn=conn)
    rows = []
    for h in histories:
        state = state_of(h.events, site_today(h.site.timezone))
        basis = REGIMES[h.site.regimes[0]].GWP_BASIS if h.site.regimes else "ar4"
        co2e = None
        if state.refrigerant:
            co2e = ng_to_kg(state.full_charge_ng) * reference.gwp(state.refrigerant, basis).value / 1000
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
                "co2e_t_display": "" if co2e is None else str(round_half_up(co2e, 2)),
                "in_service": state.in_service,
            }
        )
    return rows
