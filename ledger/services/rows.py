"""Records shaped as the JSON contracts of the views (`system show --json`, `due --json`).

Below every service that shows events or obligations (queries, obligations, recording), so
none of them needs another to shape a row.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from decimal import Decimal
from typing import Any

from ledger.domain.certificates import uncertified_work
from ledger.domain.records import Event, Obligation, SystemHistory
from ledger.units import ng_to_kg


def kg(ng: int | None) -> Decimal | None:
    """Exact kg for JSON output (None stays None)."""
    return None if ng is None else ng_to_kg(ng)


def event_json(e: Event, voided_by: dict[int, Event]) -> dict[str, Any]:
    """One event as the `system show --json` contract has it."""
    void = voided_by.get(e.id)
    return {
        "id": e.id,
        "kind": e.kind.value,
        "performed_on": e.performed_on,
        "recorded_at": e.recorded_at,
        "mass_kg": kg(e.mass_ng),
        "refrigerant": e.refrigerant,
        "charge_kg": kg(e.charge_ng),
        "result": e.result,
        "location": e.location,
        "method": e.method,
        "destination": e.destination,
        "cylinder": e.cylinder_id,
        "cylinder_before_kg": kg(e.cylinder_before_ng),
        "cylinder_after_kg": kg(e.cylinder_after_ng),
        "technician": e.technician,
        "company": e.company,
        "certificate": e.certificate,
        "uncertified": uncertified_work(e) and void is None,
        "recorded_by": e.recorded_by,
        "note": e.note,
        "voids": e.voids_id,
        "reason": e.reason,
        "voided_by": void.id if void else None,
        "void_reason": void.reason if void else None,
        "attachments": list(e.attachments),
        "reclaimed": e.reclaimed,
        "facility": e.facility,
        "facility_certificate": e.facility_certificate,
        "chain_hash": e.chain_hash,
    }


def obligation_json(ob: Obligation, labels: Mapping[int, tuple[str, str]]) -> dict[str, Any]:
    """One obligation as the `due --json` contract has it."""
    site_code, tag = labels.get(ob.system_id, (ob.site_code, None)) if ob.system_id else (ob.site_code, None)
    return {
        "site": site_code,
        "system": tag,
        "kind": ob.kind.value,
        "due_on": ob.due_on,
        "earliest_on": ob.earliest_on,
        "status": ob.status.value,
        "regime": ob.regime,
        "basis": str(ob.basis),
        "detail": ob.detail,
        "caused_by": ob.caused_by,
        "met_by": ob.met_by,
    }


def labels_of(histories: Sequence[SystemHistory]) -> dict[int, tuple[str, str]]:
    """System id -> (site code, tag)."""
    return {h.system.id: (h.site.code, h.system.tag) for h in histories}
