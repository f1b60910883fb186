"""Read-only views: lists, one system's full picture, what is due next.

Each returns plain data (dicts, lists) ready for JSON or a table; the CLI renders it.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import date
from typing import Any

from ledger.domain.booking import book
from ledger.domain.records import ObligationStatus
from ledger.reference import load_reference
from ledger.services.rows import event_json, kg, labels_of, obligation_json
from ledger.store import repository as repo
from ledger.store.db import Database
from ledger.units import ng_to_kg, ng_to_lb


def sites(db: Database) -> list[dict[str, Any]]:
    """Every site with its regimes and system count."""
    with db.read() as conn:
        counts: dict[str, int] = {}
        for s in repo.list_systems(conn=conn):
            counts[s.site_code] = counts.get(s.site_code, 0) + 1
        return [
            {
                "code": s.code,
                "name": s.name,
                "country": s.country,
                "subdivision": s.subdivision,
                "timezone": s.timezone,
                "regimes": list(s.regimes),
                "leak_rate_method": s.leak_rate_method,
                "unit": s.mass_unit,
                "systems": counts.get(s.code, 0),
            }
            for s in repo.list_sites(conn=conn)
        ]


def site_codes(db: Database) -> list[str]:
    """The code of every site, sorted (a filter's choices: one small query)."""
    with db.read() as conn:
        return sorted(s.code for s in repo.list_sites(conn=conn))


def technicians(db: Database) -> list[dict[str, Any]]:
    """Every technician with certificates."""
    with db.read() as conn:
        return [
            {
                "name": t.name,
                "company": t.company,
                "certificates": [
                    {
                        "scheme": c.scheme,
                        "number": c.number,
                        "category": c.category,
                        "valid_from": c.valid_from,
                        "valid_to": c.valid_to,
                        "scope": c.scope,
                        "issuer": c.issuer,
                    }
                    for c in t.certificates
                ],
            }
            for t in repo.list_technicians(conn=conn)
        ]


def company_certificates(db: Database) -> list[dict[str, Any]]:
    """Every company certificate."""
    with db.read() as conn:
        return [
            {"company": c.company, "scope": c.scope, "certificate": c.number, "issuer": c.issuer,
             "valid_from": c.valid_from, "valid_to": c.valid_to}
            for c in repo.company_certificates(conn=conn)
        ]


def cylinders(db: Database) -> list[dict[str, Any]]:
    """Every cylinder."""
    with db.read() as conn:
        return [
            {"id": c.id, "refrigerant": c.refrigerant, "kind": c.kind.value, "tare_kg": kg(c.tare_ng)}
            for c in repo.list_cylinders(conn=conn)
        ]


def find_systems(
    db: Database,
    *,
    text: str,
    sites: Sequence[str] | None = None,
    exact: tuple[str, str] | None = None,
    limit: int = 50,
) -> list[dict[str, Any]]:
    """Systems whose code (SITE/TAG), tag or description contains ``text`` (any case).

    Args:
        text: what was typed or scanned.
        sites: only these sites (None: every site).
        exact: (site code, tag) to match exactly instead, e.g. a code read from a label.
        limit: at most this many rows.
    """
    needle = text.strip().casefold()
    with db.read() as conn:
        systems = repo.list_systems(conn=conn)
    rows = []
    for s in systems:
        if sites is not None and s.site_code not in sites:
            continue
        code = f"{s.site_code}/{s.tag}"
        if exact is not None:
            if (s.site_code.casefold(), s.tag.casefold()) != (exact[0].casefold(), exact[1].casefold()):
                continue
        elif needle not in code.casefold() and needle not in s.description.casefold():
            continue
        rows.append({"site": s.site_code, "tag": s.tag, "code": code, "description": s.description,
                     "application": s.application.value})
        if len(rows) >= limit:
            break
    return rows


def label_rows(db: Database, *, site_code: str, base_url: str) -> list[dict[str, Any]]:
    """One row per system of a site for its label: code, description, refrigerant and page URL."""
    from urllib.parse import quote, urlsplit

    from ledger.errors import InputError

    parts = urlsplit(base_url)
    if parts.scheme not in ("http", "https") or not parts.netloc:
        raise InputError("--base-url", base_url, "must be an http:// or https:// address")
    root = base_url.rstrip("/")
    with db.read() as conn:
        repo.get_site(site_code, conn=conn)
        histories = repo.load_histories(site_code, conn=conn)
    rows = []
    for h in histories:
        state = book(h).state(date.max)
        if not state.in_service:
            continue
        rows.append({
            "code": f"{h.site.code}/{h.system.tag}",
            "description": h.system.description,
            "refrigerant": state.refrigerant,
            "url": f"{root}/systems/{quote(h.site.code, safe='')}/{quote(h.system.tag, safe='')}",
        })
    return rows


def system_view(db: Database, *, site_code: str, tag: str, as_of: date) -> dict[str, Any]:
    """Everything about one system on a day: facts, state, tiers, obligations, leak rates."""
    from ledger.domain.leak_rate import leak_rates_json
    from ledger.rules import REGIMES, site_profile
    from ledger.services.obligations import compute, current_only, load_evidence
    from ledger.services.reporting import charge_co2e_t, site_basis

    reference = load_reference()
    with db.read() as conn:
        _, sys_ = repo.get_system(site_code, tag, conn=conn)
    histories, evidence = load_evidence(db, system_id=sys_.id)
    history = histories[0]
    site = history.site
    state = book(history).state(as_of)
    basis = site_basis(site)
    co2e = None
    gwp = None
    if state.refrigerant:
        gwp = reference.gwp(state.refrigerant, basis).value
        co2e = charge_co2e_t(state.full_charge_ng, gwp)
    voided_by = {e.voids_id: e for e in history.events if e.voids_id is not None}
    obligations, findings = compute([history], as_of, evidence)
    current, _ = current_only(obligations)
    labels = labels_of([history])
    ref = reference.lookup(state.refrigerant) if state.refrigerant else None
    return {
        "site": site.code,
        "tag": sys_.tag,
        "description": sys_.description,
        "application": sys_.application.value,
        "equipment_form": sys_.equipment_form.value,
        "hermetic": sys_.hermetic,
        "refrigerant": state.refrigerant,
        "safety_class": ref.safety_class if ref else None,
        "full_charge_kg": ng_to_kg(state.full_charge_ng),
        "full_charge_lb": ng_to_lb(state.full_charge_ng),
        "unit": site.mass_unit,
        "gwp_basis": basis,
        "gwp": gwp,
        "co2e_t": co2e,
        "in_service": state.in_service,
        "in_service_on": state.in_service_on,
        "retired_on": state.retired_on,
        "detection_system": state.detection_system,
        "last_check_on": state.last_check_on,
        "last_repair_on": state.last_repair_on,
        "open_leaks": list(state.open_leaks),
        "as_of": as_of,
        "regimes": list(site.regimes),
        "tier": {
            code: {
                "band": t.band,
                "interval_months": t.interval_months,
                "basis": str(t.basis),
                "reason": t.reason,
            }
            for code in site.regimes
            for t in [REGIMES[code].tier_of(history, reference, as_of)]
        },
        "obligations": [obligation_json(o, labels) for o in current],
        "obligations_history": [obligation_json(o, labels) for o in obligations],
        "findings": [{"source": f.source, "message": f.message, "severity": f.severity.value} for f in findings],
        "leak_rates": leak_rates_json(history, as_of) if site_profile(site.regimes).leak_rates else [],
        "events": [event_json(e, voided_by) for e in sorted(history.events, key=lambda e: e.id)],
    }


def next_due(db: Database, *, site_code: str, tag: str, limit: int = 3) -> list[str]:
    """One line per open or overdue obligation of a system, earliest first."""
    from ledger.services.obligations import compute, current_only, load_evidence
    from ledger.services.recording import site_today

    with db.read() as conn:
        _, sys_ = repo.get_system(site_code, tag, conn=conn)
    histories, evidence = load_evidence(db, system_id=sys_.id)
    today = site_today(histories[0].site.timezone)
    obligations, _ = compute(histories, today, evidence)
    current, _ = current_only(obligations)
    pending = [o for o in current if o.status is not ObligationStatus.MET]
    return [
        f"{o.kind.value} {'overdue since' if o.status is ObligationStatus.OVERDUE else 'due by'} "
        f"{o.due_on.isoformat()} ({o.regime}: {o.basis.citation})"
        for o in pending[:limit]
    ]


def leak_rate_view(db: Database, *, site_code: str, tag: str, method: str | None, as_of: date | None) -> dict[str, Any]:
    """US leak rate at every addition of one system (the site's method unless one is named)."""
    from dataclasses import replace

    from ledger.domain.leak_rate import leak_rates_json, threshold_percent
    from ledger.services.recording import site_today

    with db.read() as conn:
        _, sys_ = repo.get_system(site_code, tag, conn=conn)
        history = repo.load_histories(conn=conn, system_id=sys_.id)[0]
    if method:
        history = replace(history, site=replace(history.site, leak_rate_method=method))
    day = as_of or site_today(history.site.timezone)
    return {
        "site": site_code,
        "system": tag,
        "application": sys_.application.value,
        "method": history.site.leak_rate_method,
        "unit": history.site.mass_unit,
        "threshold_percent": threshold_percent(sys_.application),
        "as_of": day,
        "rows": leak_rates_json(history, day),
    }


def rules_view(code: str | None = None) -> list[dict[str, Any]]:
    """Each regime's constants with their basis and confidence mark."""
    from ledger.errors import NotFound
    from ledger.rules import REGIMES

    if code is not None and code not in REGIMES:
        raise NotFound(f"regime: {code!r} is not one of {', '.join(REGIMES)}")
    return [
        {
            "code": c,
            "title": module.TITLE,
            "version": module.REGIME_VERSION,
            "gwp_basis": module.GWP_BASIS,
            "constants": [
                {
                    "name": k.name,
                    "value": k.value,
                    "unit": k.unit,
                    "citation": k.basis.citation,
                    "confidence": k.basis.confidence.value,
                    "note": k.basis.note,
                }
                for k in module.CONSTANTS
            ],
        }
        for c, module in REGIMES.items()
        if code is None or c == code
    ]
