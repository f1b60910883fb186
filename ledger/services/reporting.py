"""Report data: one system's logbook and the annual loss summary, as plain dicts.

The database is read once per report (``load_histories``: three set-based queries, plus the
cylinder list for logbooks); everything after that is plain Python over the loaded records.
Masses are summed as integer milligrams and turned into exact ``Decimal`` kg at the end, so
every total reconciles with the events to the milligram. The dicts returned here are the JSON
contract of ``refledger report ... --json`` (docs/reports.md) and the input of the writers in
``ledger.exports``.
"""

from __future__ import annotations

import hashlib
from collections import defaultdict
from collections.abc import Iterable, Mapping, Sequence
from datetime import UTC, date, datetime
from decimal import ROUND_HALF_UP, Context, Decimal, localcontext
from typing import Any

from ledger import __version__
from ledger.domain import emissions as em
from ledger.domain.records import (
    CheckResult,
    Cylinder,
    Event,
    EventKind,
    Finding,
    Obligation,
    ObligationKind,
    ObligationStatus,
    SystemHistory,
)
from ledger.domain.state import effective_events, state_of
from ledger.errors import InputError, LedgerError
from ledger.exports.common import CAUTION
from ledger.reference import BASES, Reference, load_reference
from ledger.store import repository as repo
from ledger.store.db import Database

_EXACT = Context(prec=60)
_SHOW = Context(prec=28)
# Derived figures are rounded half-up once, where they are made, so that the JSON, the
# spreadsheet (15 significant digits) and the PDF show the same number: t CO2e and emission
# estimates to the gram, percentages to 1e-4. Masses of record stay exact (whole mg).
CO2E_PLACES = 6
KG_PLACES = 6
PERCENT_PLACES = 4
# Used when the sites in a summary do not share one regime basis (or have no regime): the EU
# F-gas convention is AR4 100-year for saturated HFCs (the basis of every regime we cover) and
# also gives figures for olefins and natural refrigerants, which AR4 does not list.
FALLBACK_BASIS = "eu"
CHRONIC_PERCENT = Decimal(125)  # US 40 CFR 82.157(j): >= 125 % of full charge added in a year
PERIODIC_CHECKS = frozenset({ObligationKind.LEAK_CHECK, ObligationKind.LEAK_INSPECTION})

KIND_LABELS: Mapping[EventKind, str] = {
    EventKind.IN_SERVICE: "placed in service",
    EventKind.ADD: "refrigerant added",
    EventKind.RECOVER: "refrigerant recovered",
    EventKind.CHECK: "leak check",
    EventKind.REPAIR: "repair",
    EventKind.FOLLOW_UP: "follow-up check",
    EventKind.DETECTION_ON: "detection system installed",
    EventKind.DETECTION_OFF: "detection system removed",
    EventKind.DETECTION_CHECK: "detection system check",
    EventKind.CHARGE_REVISED: "full charge revised",
    EventKind.RETROFIT: "retrofit",
    EventKind.RETIRE: "taken out of service",
    EventKind.VOID: "correction (void)",
}


def _kg(mg: int | None) -> Decimal | None:
    return None if mg is None else em.kg(mg)


def rounded(value: Decimal | None, places: int) -> Decimal | None:
    """Half-up rounding to ``places`` decimals (None stays None)."""
    if value is None:
        return None
    with localcontext(_EXACT):
        return value.quantize(Decimal(1).scaleb(-places), rounding=ROUND_HALF_UP)


def _percent(part_mg: int, whole_mg: int) -> Decimal | None:
    if whole_mg <= 0:
        return None
    with localcontext(_SHOW):
        return rounded(Decimal(part_mg * 100) / Decimal(whole_mg), PERCENT_PLACES)


def _sum(values: Iterable[Decimal]) -> Decimal:
    with localcontext(_EXACT):
        return sum(values, Decimal(0))


def utc_now() -> datetime:
    """The generation time printed on reports (services may read the clock; domain may not)."""
    return datetime.now(UTC).replace(microsecond=0)


def today_utc() -> date:
    """Today's date in UTC."""
    return utc_now().date()


# --- GWP basis ------------------------------------------------------------------------------


def default_basis(histories: Sequence[SystemHistory]) -> str:
    """The GWP basis a summary uses when none is asked for.

    The GWP basis of each site's first regime; when the sites disagree (an estate with EU and
    US sites) or a site has no regime, ``eu`` (see FALLBACK_BASIS).
    """
    from ledger.rules import REGIMES

    found = set()
    for site in {h.site.code: h.site for h in histories}.values():
        if not site.regimes or site.regimes[0] not in REGIMES:
            return FALLBACK_BASIS
        found.add(REGIMES[site.regimes[0]].GWP_BASIS)
    return found.pop() if len(found) == 1 else FALLBACK_BASIS


def check_basis(basis: str) -> str:
    """A basis code as typed, checked against the reference bases."""
    value = basis.strip().lower()
    if value not in BASES:
        raise InputError("--basis", basis, f"is not one of {', '.join(BASES)}")
    return value


class _Gwp:
    """GWP per refrigerant under one basis, with notes on components the basis does not list."""

    def __init__(self, reference: Reference, basis: str) -> None:
        self.reference, self.basis = reference, basis
        self.values: dict[str, Decimal] = {}
        self.notes: list[str] = []

    def __call__(self, refrigerant: str) -> Decimal:
        if refrigerant not in self.values:
            if refrigerant == em.UNKNOWN_REFRIGERANT:
                self.values[refrigerant] = Decimal(0)
                self.notes.append("mass moved while no refrigerant was recorded counts as GWP 0")
            else:
                try:
                    figure = self.reference.gwp(refrigerant, self.basis)
                except LedgerError:
                    self.values[refrigerant] = Decimal(0)
                    self.notes.append(f"{refrigerant}: not in the reference data; counted as GWP 0")
                else:
                    self.values[refrigerant] = figure.value
                    if figure.unlisted:
                        self.notes.append(
                            f"{refrigerant}: the {self.basis} basis lists no GWP for "
                            f"{', '.join(figure.unlisted)}; counted as 0"
                        )
        return self.values[refrigerant]


# --- obligations ----------------------------------------------------------------------------


def _event_days(histories: Iterable[SystemHistory]) -> dict[int, date]:
    return {e.id: e.performed_on for h in histories for e in h.events}


def _obligation_row(
    ob: Obligation, labels: Mapping[int, tuple[str, str]], event_days: Mapping[int, date]
) -> dict[str, Any]:
    site_code, tag = (ob.site_code, None)
    if ob.system_id is not None:
        site_code, tag = labels.get(ob.system_id, (ob.site_code, None))
    met_on = event_days.get(ob.met_by) if ob.met_by is not None else None
    late = bool(met_on is not None and met_on > ob.due_on)
    if ob.status is ObligationStatus.MET:
        state = "met late" if late else "met"
    elif ob.status is ObligationStatus.OVERDUE:
        state = "missed"
    else:
        state = "open"
    return {
        "site": site_code,
        "system": tag,
        "kind": ob.kind.value,
        "due_on": ob.due_on,
        "earliest_on": ob.earliest_on,
        "status": ob.status.value,
        "state": state,
        "regime": ob.regime,
        "basis": str(ob.basis),
        "detail": ob.detail,
        "caused_by": ob.caused_by,
        "met_by": ob.met_by,
        "met_on": met_on,
        "late": late,
    }


# --- annual summary -------------------------------------------------------------------------

_MASS_FIELDS = (
    "charge_start_mg", "charge_end_mg", "last_charge_mg", "added_mg", "initial_fill_mg",
    "recovered_mg", "new_charge_mg", "retired_charge_mg", "retired_recovered_mg",
)


def _totals(flows: Sequence[em.Flow], gwp: _Gwp) -> dict[str, Any]:
    """Integer-mg totals of flows plus exact CO2e of their service additions."""
    t: dict[str, Any] = {name: sum(getattr(f, name) for f in flows) for name in _MASS_FIELDS}
    to: dict[str, int] = defaultdict(int)
    for f in flows:
        for where, mg in f.recovered_to:
            to[where] += mg
    t["recovered_to"] = dict(sorted(to.items()))
    t["service_added_mg"] = t["added_mg"] - t["initial_fill_mg"]
    t["net_loss_mg"] = sum(f.net_loss_mg for f in flows)
    t["co2e_t"] = _sum(em.co2e_t(em.kg(f.service_added_mg), gwp(f.refrigerant)) for f in flows)
    return t


def _mass_view(t: Mapping[str, Any], full_charge_mg: int) -> dict[str, Any]:
    """The kg keys of a summary row from integer-mg totals."""
    return {
        "full_charge_kg": em.kg(full_charge_mg),
        "full_charge_start_kg": em.kg(t["charge_start_mg"]),
        "full_charge_end_kg": em.kg(t["charge_end_mg"]),
        "added_kg": em.kg(t["added_mg"]),
        "initial_fill_kg": em.kg(t["initial_fill_mg"]),
        "service_added_kg": em.kg(t["service_added_mg"]),
        "recovered_kg": em.kg(t["recovered_mg"]),
        "recovered_to": {k: em.kg(v) for k, v in t["recovered_to"].items()},
        "net_loss_kg": em.kg(t["net_loss_mg"]),
        "leak_rate_percent": _percent(t["service_added_mg"], full_charge_mg),
        "co2e_t": rounded(t["co2e_t"], CO2E_PLACES),
    }


def _check_counts(obs: Sequence[Obligation], done: int) -> dict[str, int]:
    periodic = [o for o in obs if o.kind in PERIODIC_CHECKS]
    return {
        "checks_required": len(periodic),
        "checks_done": done,
        "checks_missed": sum(o.status is ObligationStatus.OVERDUE for o in periodic),
        "overdue": sum(o.status is ObligationStatus.OVERDUE for o in obs),
    }


def annual_data(
    histories: Sequence[SystemHistory],
    reference: Reference,
    *,
    year: int,
    basis: str,
    obligations: Sequence[Obligation] = (),
    as_of: date | None = None,
    site_code: str | None = None,
    generated_at: datetime | None = None,
) -> dict[str, Any]:
    """The annual loss summary of loaded histories (pure: no database, no clock).

    Args:
        histories: the systems in scope with all their events.
        reference: refrigerant tables (GWPs).
        year: the calendar year.
        basis: GWP basis code (``eu``, ``ar4``, ``ar5``, ``ar6``).
        obligations: every obligation of these systems evaluated on ``as_of`` (met ones too);
            those due in the year are counted.
        as_of: the day the obligations were evaluated (default 31 December of the year).
        site_code: the site the summary was limited to, if any (shown only).
        generated_at: generation time printed on the report.
    Returns:
        The JSON contract: year, basis, systems, sites, refrigerants, estate, scope1, caution
        and further keys (see docs/reports.md).
    """
    start, end = date(year, 1, 1), date(year, 12, 31)
    as_of = as_of or end
    gwp = _Gwp(reference, basis)
    labels = {h.system.id: (h.site.code, h.system.tag) for h in histories}
    event_days = _event_days(histories)
    in_year = [o for o in obligations if start <= o.due_on <= end]
    by_system: dict[int | None, list[Obligation]] = defaultdict(list)
    by_site_facility: dict[str, list[Obligation]] = defaultdict(list)
    for o in in_year:
        if o.system_id is None:
            by_site_facility[o.site_code or ""].append(o)
        else:
            by_system[o.system_id].append(o)

    all_flows: list[em.Flow] = []
    systems: list[dict[str, Any]] = []
    sys_totals: dict[int, dict[str, Any]] = {}
    checks_done: dict[int, int] = {}
    categories: dict[int, em.ScreeningCategory] = {}
    monthly_mg: dict[str, dict[int, int]] = defaultdict(lambda: defaultdict(int))
    yearly_mg: dict[str, dict[int, int]] = defaultdict(lambda: defaultdict(int))
    for h in sorted(histories, key=lambda h: (h.site.code, h.system.tag)):
        for a in em.additions(h):
            if a.initial or a.on > end:
                continue
            yearly_mg[a.refrigerant][a.on.year] += a.mass_mg
            if a.on >= start:
                monthly_mg[a.refrigerant][a.on.month] += a.mass_mg
        flows = em.period_flows(h, start, end)
        if not flows:
            continue
        all_flows.extend(flows)
        categories[h.system.id] = em.screening_category(h.system)
        t = _totals(flows, gwp)
        sys_totals[h.system.id] = t
        full_mg = flows[-1].last_charge_mg
        t["full_charge_mg"] = full_mg
        kept = effective_events(h.events)
        done = sum(1 for e in kept if e.kind is EventKind.CHECK and start <= e.performed_on <= end)
        checks_done[h.system.id] = done
        end_state = state_of(h.events, end)
        names = list(dict.fromkeys(f.refrigerant for f in flows))
        chronic = full_mg > 0 and t["service_added_mg"] * 100 >= CHRONIC_PERCENT * full_mg
        t["chronic"] = chronic
        systems.append({
            "site": h.site.code,
            "system": h.system.tag,
            "description": h.system.description,
            "application": h.system.application.value,
            "refrigerant": names[-1],
            "refrigerants": names,
            "gwp": gwp(names[-1]),
            **_mass_view(t, full_mg),
            "chronic": chronic,
            "in_service_at_end": end_state.in_service,
            "placed_in_service_on": end_state.in_service_on
            if end_state.in_service_on and end_state.in_service_on >= start else None,
            "retired_on": end_state.retired_on
            if end_state.retired_on and end_state.retired_on >= start else None,
            "screening_category": categories[h.system.id].value,
            **_check_counts(by_system.get(h.system.id, []), done),
        })

    # sites: totals over their systems (plus facility duties in the overdue count)
    sites: list[dict[str, Any]] = []
    site_info = {h.site.code: h.site for h in histories}
    site_ids: dict[str, list[int]] = defaultdict(list)
    for h in histories:
        if h.system.id in sys_totals:
            site_ids[h.site.code].append(h.system.id)
    flows_of: dict[int, list[em.Flow]] = defaultdict(list)
    for f in all_flows:
        flows_of[f.system_id].append(f)
    for code in sorted(set(site_ids) | set(by_site_facility)):
        ids = site_ids.get(code, [])
        flows = [f for i in ids for f in flows_of[i]]
        t = _totals(flows, gwp)
        full_mg = sum(sys_totals[i]["full_charge_mg"] for i in ids)
        obs = [o for i in ids for o in by_system.get(i, [])] + by_site_facility.get(code, [])
        site = site_info.get(code)
        sites.append({
            "site": code,
            "name": site.name if site else "",
            "country": site.country if site else "",
            "regimes": list(site.regimes) if site else [],
            "systems": len(ids),
            **_mass_view(t, full_mg),
            "chronic": sum(1 for i in ids if sys_totals[i]["chronic"]),
            **_check_counts(obs, sum(checks_done[i] for i in ids)),
        })

    refrigerants: list[dict[str, Any]] = []
    grouped: dict[str, list[em.Flow]] = defaultdict(list)
    for f in all_flows:
        grouped[f.refrigerant].append(f)
    for name in sorted(grouped):
        flows = grouped[name]
        t = _totals(flows, gwp)
        refrigerants.append({
            "refrigerant": name,
            "gwp": gwp(name),
            "systems": len({f.system_id for f in flows}),
            **_mass_view(t, t["last_charge_mg"]),
        })

    et = _totals(all_flows, gwp)
    estate_full = sum(t["full_charge_mg"] for t in sys_totals.values())
    estate = {
        "systems": len(systems),
        "sites": len(sites),
        **_mass_view(et, estate_full),
        "chronic": sum(1 for t in sys_totals.values() if t["chronic"]),
        **_check_counts(in_year, sum(checks_done.values())),
        "met_late": sum(1 for o in in_year if o.met_by is not None
                        and event_days.get(o.met_by, o.due_on) > o.due_on),
    }

    methods = em.scope1(all_flows, {n: gwp(n) for n in grouped}, categories)
    monthly = []
    for month in range(1, 13):
        mg = sum(monthly_mg[r][month] for r in monthly_mg)
        monthly.append({
            "month": f"{year}-{month:02d}",
            "added_kg": em.kg(mg),
            "co2e_t": rounded(_sum(em.co2e_t(em.kg(monthly_mg[r][month]), gwp(r))
                                   for r in monthly_mg), CO2E_PLACES),
        })
    first_year = min((y for per in yearly_mg.values() for y in per), default=year)
    trend = [
        {
            "year": y,
            "added_kg": em.kg(sum(per.get(y, 0) for per in yearly_mg.values())),
            "co2e_t": rounded(_sum(em.co2e_t(em.kg(per.get(y, 0)), gwp(r))
                                   for r, per in yearly_mg.items()), CO2E_PLACES),
        }
        for y in range(first_year, year + 1)
    ]
    obligation_rows = [_obligation_row(o, labels, event_days) for o in in_year]
    obligation_rows.sort(key=lambda r: (r["due_on"], r["site"] or "", r["system"] or "", r["kind"]))
    return {
        "report": "annual-loss-summary",
        "year": year,
        "period": {"from": start, "to": end},
        "basis": basis,
        "site_filter": site_code,
        "as_of": as_of,
        "systems": systems,
        "sites": sites,
        "refrigerants": refrigerants,
        "estate": estate,
        "scope1": [method_json(m) for m in methods],
        "monthly": monthly,
        "trend": trend,
        "obligations": obligation_rows,
        "notes": list(dict.fromkeys(gwp.notes)),
        "chain": chain_digest(histories),
        "generated_at": generated_at,
        "version": __version__,
        "caution": CAUTION,
    }


def method_json(m: em.MethodResult) -> dict[str, Any]:
    """One scope-1 method result as plain data."""
    return {
        "method": m.method,
        "label": m.label,
        "formula": m.formula,
        "source": m.source,
        "assumptions": list(m.assumptions),
        "inputs": {k: rounded(v, KG_PLACES) for k, v in m.inputs_kg().items()},
        "factors": [
            {
                "category": f.category.value,
                "label": f.label,
                "k_percent": f.k_percent,
                "x_percent": f.x_percent,
                "y_percent": f.y_percent,
                "z_percent": f.z_percent,
                "source": f.source,
                "confidence": f.confidence.value,
            }
            for f in m.factors
        ],
        "by_refrigerant": [
            {
                "refrigerant": p.refrigerant,
                "category": p.category,
                "inputs": {k: rounded(v, KG_PLACES) for k, v in p.inputs_kg},
                "emissions_kg": rounded(p.emissions_kg, KG_PLACES),
                "gwp": p.gwp,
                "co2e_t": rounded(p.co2e_t, CO2E_PLACES),
            }
            for p in m.parts
        ],
        "emissions_kg": rounded(m.emissions_kg, KG_PLACES),
        "co2e_t": rounded(m.co2e_t, CO2E_PLACES),
    }


def chain_digest(histories: Sequence[SystemHistory]) -> dict[str, Any]:
    """A digest of every system's chain head, so an estate report can be tied to the ledger.

    SHA-256 over the lines ``<system id>:<chain head>`` in system-id order.
    """
    heads = sorted((h.system.id, chain_head_of(h.events)) for h in histories)
    text = "".join(f"{sid}:{head or ''}\n" for sid, head in heads)
    return {"systems": len(heads), "digest": hashlib.sha256(text.encode()).hexdigest()}


def chain_head_of(events: Sequence[Event]) -> str | None:
    """The hash of a system's last recorded event (its chain head)."""
    last = max(events, key=lambda e: e.id, default=None)
    return last.chain_hash if last else None


def annual_summary(
    db: Database,
    *,
    year: int,
    site_code: str | None = None,
    basis: str | None = None,
    as_of: date | None = None,
) -> dict[str, Any]:
    """Load the estate (or one site) once and build its annual loss summary.

    Args:
        year: the calendar year.
        site_code: limit to one site.
        basis: GWP basis; default ``default_basis`` of the systems in scope.
        as_of: the day obligations are evaluated on; default the year's last day, or today
            for the current year.
    """
    from ledger.services.obligations import compute, load_evidence

    if not 1900 < year < 2200:
        raise InputError("--year", year, "is not a plausible year")
    reference = load_reference()
    histories, evidence = load_evidence(db, site_code=site_code)
    chosen = check_basis(basis) if basis else default_basis(histories)
    as_of = as_of or min(date(year, 12, 31), today_utc())
    obligations, _ = compute(histories, as_of, evidence)
    return annual_data(
        histories, reference, year=year, basis=chosen, obligations=obligations, as_of=as_of,
        site_code=site_code, generated_at=utc_now(),
    )


# --- logbook --------------------------------------------------------------------------------


def _purpose(e: Event, events: Sequence[Event], charged_days: set[date]) -> str:
    """Why refrigerant was added, derived from the record (EU 517/2014 Art 6(b) asks for it)."""
    if e.performed_on in charged_days:
        return "installation"
    state = state_of(events, e.performed_on)
    same_day = any(
        x.performed_on == e.performed_on
        and (x.kind is EventKind.REPAIR
             or (x.kind is EventKind.CHECK and x.result == CheckResult.LEAK_FOUND))
        for x in events
    )
    return "leak" if state.open_leaks or same_day else "servicing"


def logbook_data(
    history: SystemHistory,
    reference: Reference,
    *,
    from_on: date | None,
    to_on: date,
    obligations: Sequence[Obligation],
    cylinders: Mapping[str, Cylinder],
    generated_at: datetime | None = None,
    findings: Sequence[Finding] = (),
) -> dict[str, Any]:
    """One system's logbook over a period (pure: no database, no clock).

    Args:
        history: the system with all its events.
        reference: refrigerant tables.
        from_on: first day shown (None: from the first event).
        to_on: last day shown; also the day the header state and obligations are taken on.
        obligations: the system's obligations evaluated on ``to_on``.
        cylinders: cylinder id -> cylinder (for the cylinder kind).
        generated_at: generation time printed on the report.
    """
    from ledger.domain.leak_rate import leak_rates_json
    from ledger.rules import REGIMES

    site, system = history.site, history.system
    kept = effective_events(history.events)
    state = state_of(history.events, to_on)
    basis = default_basis([history])
    ref = None
    gwp = co2e = None
    gwp_note = ""
    composition: list[dict[str, Any]] = []
    if state.refrigerant:
        try:
            ref = reference.lookup(state.refrigerant)
        except LedgerError:
            ref = None
        if ref is not None:
            figure = reference.gwp(ref.designation, basis)
            gwp = figure.value
            if figure.unlisted:
                gwp_note = f"the {basis} basis lists no GWP for {', '.join(figure.unlisted)}; counted as 0"
            co2e = rounded(em.co2e_t(em.kg(state.full_charge_mg), gwp), CO2E_PLACES)
            composition = [{"component": c, "mass_percent": p} for c, p in ref.components]
    tiers = [
        {
            "regime": code,
            "title": getattr(REGIMES[code], "TITLE", code),
            "band": t.band,
            "interval_months": t.interval_months,
            "basis": str(t.basis),
            "reason": t.reason,
        }
        for code in site.regimes
        if code in REGIMES
        for t in [REGIMES[code].tier_of(history, reference, to_on)]
    ]
    voided_by = {e.voids_id: e for e in history.events if e.kind is EventKind.VOID}
    charging = (EventKind.IN_SERVICE, EventKind.RETROFIT)
    charged_days = {e.performed_on for e in kept if e.kind in charging}
    held: dict[int, str | None] = {}
    current: str | None = None
    for e in sorted(history.events, key=lambda e: (e.performed_on, e.id)):
        if e.kind in (EventKind.IN_SERVICE, EventKind.RETROFIT) and e.id not in voided_by:
            current = e.refrigerant or current
        held[e.id] = current
    rows = []
    for e in sorted(history.events, key=lambda e: (e.performed_on, e.id)):
        if e.performed_on > to_on or (from_on is not None and e.performed_on < from_on):
            continue
        void = voided_by.get(e.id)
        cyl = cylinders.get(e.cylinder_id) if e.cylinder_id else None
        rows.append({
            "id": e.id,
            "on": e.performed_on,
            "kind": e.kind.value,
            "kind_label": KIND_LABELS.get(e.kind, e.kind.value),
            "refrigerant": held.get(e.id),
            "mass_kg": _kg(e.mass_mg),
            "charge_kg": _kg(e.charge_mg),
            "added_for": _purpose(e, kept, charged_days)
            if e.kind is EventKind.ADD and not void else None,
            "cylinder": e.cylinder_id,
            "cylinder_kind": cyl.kind.value if cyl else None,
            "cylinder_before_kg": _kg(e.cylinder_before_mg),
            "cylinder_after_kg": _kg(e.cylinder_after_mg),
            "reclaimed": e.reclaimed,
            "result": e.result,
            "location": e.location,
            "method": e.method,
            "destination": e.destination,
            "technician": e.technician,
            "company": e.company,
            "certificate": e.certificate,
            "recorded_by": e.recorded_by,
            "recorded_at": e.recorded_at,
            "note": e.note,
            "attachments": list(e.attachments),
            "voided": void is not None,
            "voided_by": void.id if void else None,
            "void_reason": void.reason if void else None,
            "voids": e.voids_id,
            "reason": e.reason,
            "chain_hash": e.chain_hash,
        })
    labels = {system.id: (site.code, system.tag)}
    days = _event_days([history])
    obs = [
        _obligation_row(o, labels, days)
        for o in obligations
        if o.system_id == system.id
        and (o.status is not ObligationStatus.MET or from_on is None or o.due_on >= from_on)
        and (o.due_on <= to_on or o.status is not ObligationStatus.MET)
    ]
    obs.sort(key=lambda r: (r["due_on"], r["kind"]))
    leak_rates = []
    if site.country == "US":
        leak_rates = [
            {**r, **{k: rounded(r[k], PERCENT_PLACES) for k in
                     ("annualizing_percent", "rolling_percent", "percent")}}
            for r in leak_rates_json(history, to_on) if from_on is None or r["on"] >= from_on
        ]
    period_from = from_on or (min((e.performed_on for e in history.events), default=to_on))
    return {
        "report": "system-logbook",
        "site": {
            "code": site.code, "name": site.name, "country": site.country,
            "subdivision": site.subdivision, "regimes": list(site.regimes),
            "mass_unit": site.mass_unit,
        },
        "system": {
            "tag": system.tag, "description": system.description,
            "application": system.application.value, "equipment_form": system.equipment_form.value,
            "hermetic": system.hermetic, "residential": system.residential,
            "location": system.location, "maker": system.maker, "model": system.model,
            "serial": system.serial,
        },
        "refrigerant": state.refrigerant,
        "composition": composition,
        "safety_class": ref.safety_class if ref else None,
        "full_charge_kg": em.kg(state.full_charge_mg),
        "full_charge_lb": rounded(Decimal(state.full_charge_mg) / Decimal("453592.37"), KG_PLACES)
        if site.country == "US" else None,
        "gwp_basis": basis,
        "gwp": gwp,
        "gwp_note": gwp_note,
        "co2e_t": co2e,
        "tiers": tiers,
        "detection_system": state.detection_system,
        "in_service": state.in_service,
        "in_service_on": state.in_service_on,
        "retired_on": state.retired_on,
        "open_leaks": list(state.open_leaks),
        "period": {"from": period_from, "to": to_on},
        "events": rows,
        "obligations": obs,
        "leak_rates": leak_rates,
        "findings": [
            {"source": f.source, "message": f.message, "severity": f.severity.value} for f in findings
        ],
        "chain_head": chain_head_of(history.events),
        "events_total": len(history.events),
        "generated_at": generated_at,
        "version": __version__,
        "caution": CAUTION,
    }


def _period(history: SystemHistory, from_on: date | None, to_on: date | None) -> date:
    from ledger.services.recording import site_today

    to_day = to_on or site_today(history.site.timezone)
    if from_on is not None and from_on > to_day:
        raise InputError("--from", from_on.isoformat(), f"is after --to {to_day.isoformat()}")
    return to_day


def logbook(
    db: Database,
    *,
    site_code: str,
    tag: str,
    from_on: date | None = None,
    to_on: date | None = None,
) -> dict[str, Any]:
    """One system's logbook (see ``logbook_data``); ``to_on`` defaults to today at the site."""
    return _logbooks(db, site_code=site_code, tag=tag, from_on=from_on, to_on=to_on)[0]


def site_logbooks(
    db: Database, *, site_code: str, from_on: date | None = None, to_on: date | None = None
) -> list[dict[str, Any]]:
    """The logbook of every system of a site, from one load of the site."""
    return _logbooks(db, site_code=site_code, tag=None, from_on=from_on, to_on=to_on)


def _logbooks(
    db: Database, *, site_code: str, tag: str | None, from_on: date | None, to_on: date | None
) -> list[dict[str, Any]]:
    from ledger.services.obligations import compute, load_evidence

    reference = load_reference()
    with db.read() as conn:
        system_id = repo.get_system(site_code, tag, conn=conn)[1].id if tag is not None else None
        if tag is None:
            repo.get_site(site_code, conn=conn)
        cylinders = {c.id: c for c in repo.list_cylinders(conn=conn)}
    histories, evidence = load_evidence(db, site_code=None if tag else site_code, system_id=system_id)
    if not histories:
        return []
    to_day = _period(histories[0], from_on, to_on)
    obligations, findings = compute(histories, to_day, evidence)
    now = utc_now()
    return [
        logbook_data(h, reference, from_on=from_on, to_on=to_day, obligations=obligations,
                     cylinders=cylinders, generated_at=now,
                     findings=[f for f in findings if f.source.startswith(f"{h.site.code}/{h.system.tag}")])
        for h in histories
    ]
