"""Report data: one system's logbook and the annual loss summary, as plain dicts.

The database is read once per report (``load_histories``: three set-based queries, plus the
cylinder list for logbooks); everything after that is plain Python over the loaded records.
Masses are summed as integer nanograms (Python ints, which cannot overflow) and turned into
exact ``Decimal`` kg at the end, so every total reconciles with the events to the nanogram.
The dicts returned here are the JSON contract of ``refledger report ... --json``
(docs/reports.md) and the input of the writers in ``ledger.exports``.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable, Mapping, Sequence, Set
from dataclasses import dataclass, field, fields
from datetime import UTC, date, datetime
from decimal import ROUND_HALF_UP, Context, Decimal, localcontext
from typing import Any, overload

from ledger import __version__
from ledger.domain import emissions as em
from ledger.domain.booking import EVENT_ORDER, Booking, book
from ledger.domain.certificates import uncertified_work
from ledger.domain.records import (
    CompanyCertificate,
    Cylinder,
    Event,
    EventKind,
    Finding,
    Obligation,
    ObligationKind,
    ObligationStatus,
    Site,
    SystemHistory,
)
from ledger.domain.state import finds_leak
from ledger.errors import InputError, LedgerError
from ledger.exports.common import CAUTION
from ledger.reference import BASES, Reference, load_reference
from ledger.rules import CHRONIC_INDICATOR_PERCENT, FALLBACK_BASIS, site_profile
from ledger.store import repository as repo
from ledger.store.db import Database

_EXACT = Context(prec=60)
_SHOW = Context(prec=28)
# Derived figures are rounded half-up once, where they are made, so that the JSON, the
# spreadsheet (15 significant digits) and the PDF show the same number: t CO2e to the gram,
# emission estimates in kg to the milligram, percentages to 1e-4. Masses of record stay exact
# (whole ng).
CO2E_PLACES = 6
KG_PLACES = 6
PERCENT_PLACES = 4
# The GWP basis of a site and the chronic-leak indicator are the regimes' (`ledger.rules`):
# FALLBACK_BASIS is the basis of a site without a known regime, and of a summary whose sites
# do not share one; CHRONIC_INDICATOR_PERCENT the share of full charge added in a year that
# every system's "or more added" indicator shows.
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


def _kg(ng: int | None) -> Decimal | None:
    return None if ng is None else em.kg(ng)


@overload
def rounded(value: Decimal, places: int) -> Decimal: ...
@overload
def rounded(value: Decimal | None, places: int) -> Decimal | None: ...
def rounded(value: Decimal | None, places: int) -> Decimal | None:
    """Half-up rounding to ``places`` decimals (None stays None)."""
    if value is None:
        return None
    with localcontext(_EXACT):
        return value.quantize(Decimal(1).scaleb(-places), rounding=ROUND_HALF_UP)


def _percent(part_ng: int, whole_ng: int) -> Decimal | None:
    if whole_ng <= 0:
        return None
    with localcontext(_SHOW):
        return rounded(Decimal(part_ng * 100) / Decimal(whole_ng), PERCENT_PLACES)


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
    """The GWP basis a summary uses when none is asked for (`default_basis_of_sites` of the
    histories' sites)."""
    return default_basis_of_sites(list({h.site.code: h.site for h in histories}.values()))


def default_basis_of_sites(sites: Sequence[Site]) -> str:
    """The GWP basis a summary of these sites uses when none is asked for.

    The sites' one basis (`site_basis`) when they share it; when they disagree (an estate with
    EU and US sites), FALLBACK_BASIS.
    """
    found = {site_basis(site) for site in sites}
    return found.pop() if len(found) == 1 else FALLBACK_BASIS


def site_basis(site: Site) -> str:
    """The GWP basis of a site, as its regimes give it (``site_profile(...).gwp_basis``: the
    first known regime's, else FALLBACK_BASIS). Every figure shown for one site (system show,
    system list, logbook) uses this basis."""
    return site_profile(site.regimes).gwp_basis


def charge_co2e_t(charge_ng: int, gwp: Decimal) -> Decimal:
    """t CO2e of a full charge: kg x GWP / 1000, rounded half-up to CO2E_PLACES (the one
    rounding every view of a system's charge uses; displays show it with ``fmt(.., TONNES)``)."""
    return rounded(em.co2e_t(em.kg(charge_ng), gwp), CO2E_PLACES)


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
    """`rows.obligation_json` with the report's state (met, met late, missed, open) and the day
    it was met."""
    from ledger.services.rows import obligation_json

    met_on = event_days.get(ob.met_by) if ob.met_by is not None else None
    late = bool(met_on is not None and met_on > ob.due_on)
    if ob.status is ObligationStatus.MET:
        state = "met late" if late else "met"
    elif ob.status is ObligationStatus.OVERDUE:
        state = "missed"
    else:
        state = "open"
    row: dict[str, Any] = {}
    for key, value in obligation_json(ob, labels).items():
        row[key] = value
        if key == "status":
            row["state"] = state
    row["met_on"] = met_on
    row["late"] = late
    return row


# --- annual summary -------------------------------------------------------------------------

_MASS_FIELDS = (
    "charge_start_ng", "charge_end_ng", "last_charge_ng", "added_ng", "initial_fill_ng",
    "recovered_ng", "new_charge_ng", "retired_charge_ng", "retired_recovered_ng",
)


def _totals(flows: Sequence[em.Flow], gwp: _Gwp) -> dict[str, Any]:
    """Integer-ng totals of flows plus exact CO2e of their service additions."""
    t: dict[str, Any] = {name: sum(getattr(f, name) for f in flows) for name in _MASS_FIELDS}
    to: dict[str, int] = defaultdict(int)
    for f in flows:
        for where, ng in f.recovered_to:
            to[where] += ng
    t["recovered_to"] = dict(sorted(to.items()))
    t["service_added_ng"] = t["added_ng"] - t["initial_fill_ng"]
    t["net_loss_ng"] = sum(f.net_loss_ng for f in flows)
    t["co2e_t"] = _sum(em.co2e_t(em.kg(f.service_added_ng), gwp(f.refrigerant)) for f in flows)
    return t


_SUMMED = (*_MASS_FIELDS, "service_added_ng", "net_loss_ng")


def _merge_totals(parts: Sequence[Mapping[str, Any]]) -> dict[str, Any]:
    """`_totals` of the union of flows whose own `_totals` these are (exact: sums of sums)."""
    t: dict[str, Any] = {name: sum(p[name] for p in parts) for name in _SUMMED}
    to: dict[str, int] = defaultdict(int)
    for p in parts:
        for where, ng in p["recovered_to"].items():
            to[where] += ng
    t["recovered_to"] = dict(sorted(to.items()))
    t["co2e_t"] = _sum(p["co2e_t"] for p in parts)
    return t


def _mass_view(t: Mapping[str, Any], full_charge_ng: int) -> dict[str, Any]:
    """The kg keys of a summary row from integer-ng totals."""
    return {
        "full_charge_kg": em.kg(full_charge_ng),
        "full_charge_start_kg": em.kg(t["charge_start_ng"]),
        "full_charge_end_kg": em.kg(t["charge_end_ng"]),
        "added_kg": em.kg(t["added_ng"]),
        "initial_fill_kg": em.kg(t["initial_fill_ng"]),
        "service_added_kg": em.kg(t["service_added_ng"]),
        "recovered_kg": em.kg(t["recovered_ng"]),
        "recovered_to": {k: em.kg(v) for k, v in t["recovered_to"].items()},
        "net_loss_kg": em.kg(t["net_loss_ng"]),
        "leak_rate_percent": _percent(t["service_added_ng"], full_charge_ng),
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


@dataclass(slots=True)
class AnnualPart:
    """One site's share of an annual summary: everything `assemble_annual` needs of it.

    `annual_data` builds one per site and assembles them; `annual_summary` keeps each site's
    part (`kept_annual`), so a later summary of the same year reads the parts of unchanged
    sites instead of running the rules and folding their histories again.
    """

    site_code: str
    systems: list[dict[str, Any]]  # the summary's system rows, by tag
    site_row: dict[str, Any] | None  # the site's row (None: no flows and no facility duty)
    by_refrigerant: dict[str, dict[str, Any]]  # refrigerant -> `_totals` of its flows, plus "system_ids"
    by_screening: dict[tuple[str, str], tuple[int, ...]]  # (refrigerant, screening row) -> `_flow_sums`
    estate_counts: dict[str, int]  # `_check_counts` of all the site's obligations in the year
    met_late: int
    chronic: int
    full_charge_ng: int  # of the systems with flows
    monthly_ng: dict[str, dict[int, int]]  # refrigerant -> month -> service additions
    yearly_ng: dict[str, dict[int, int]]  # refrigerant -> year -> service additions (to the year's end)
    obligation_rows: list[dict[str, Any]]
    notes: list[str]
    heads: list[tuple[str, str | None]]  # ("SITE/TAG", chain head) of every system of the site
    # top-ups a servicing prohibition forbade, in the year: (site/tag, day, mg, warning)
    prohibited: list[tuple[str, date, int, str]] = field(default_factory=list)


def annual_part(
    histories: Sequence[SystemHistory],
    reference: Reference,
    *,
    year: int,
    basis: str,
    obligations: Sequence[Obligation] = (),
) -> AnnualPart:
    """One site's part of the annual summary (pure).

    Args:
        histories: the site's systems with all their events (one site only).
        reference: refrigerant tables (GWPs).
        year: the calendar year.
        basis: GWP basis code.
        obligations: the site's obligations evaluated on the summary's as-of day (met ones
            too); those due in the year are counted.
    """
    start, end = date(year, 1, 1), date(year, 12, 31)
    gwp = _Gwp(reference, basis)
    labels = {h.system.id: (h.site.code, h.system.tag) for h in histories}
    event_days = _event_days(histories)
    in_year = [o for o in obligations if start <= o.due_on <= end]
    by_system: dict[int | None, list[Obligation]] = defaultdict(list)
    facility: list[Obligation] = []
    for o in in_year:
        if o.system_id is None:
            facility.append(o)
        else:
            by_system[o.system_id].append(o)

    all_flows: list[em.Flow] = []
    systems: list[dict[str, Any]] = []
    sys_totals: dict[int, dict[str, Any]] = {}
    checks_done: dict[int, int] = {}
    categories: dict[int, em.ScreeningCategory] = {}
    monthly_ng: dict[str, dict[int, int]] = defaultdict(lambda: defaultdict(int))
    yearly_ng: dict[str, dict[int, int]] = defaultdict(lambda: defaultdict(int))
    for h in sorted(histories, key=lambda h: (h.site.code, h.system.tag)):
        booking = book(h)  # folded once: additions, flows, checks and the year-end state read it
        for a in em.additions(booking):
            if a.initial or a.on > end:
                continue
            yearly_ng[a.refrigerant][a.on.year] += a.mass_ng
            if a.on >= start:
                monthly_ng[a.refrigerant][a.on.month] += a.mass_ng
        flows = em.period_flows(booking, start, end)
        if not flows:
            continue
        all_flows.extend(flows)
        categories[h.system.id] = em.screening_category(h.system)
        t = _totals(flows, gwp)
        sys_totals[h.system.id] = t
        full_ng = flows[-1].last_charge_ng
        t["full_charge_ng"] = full_ng
        done = sum(1 for e in booking.events if e.kind is EventKind.CHECK and start <= e.performed_on <= end)
        checks_done[h.system.id] = done
        end_state = booking.state(end)
        names = list(dict.fromkeys(f.refrigerant for f in flows))
        chronic = full_ng > 0 and t["service_added_ng"] * 100 >= CHRONIC_INDICATOR_PERCENT * full_ng
        t["chronic"] = chronic
        systems.append({
            "site": h.site.code,
            "system": h.system.tag,
            "description": h.system.description,
            "application": h.system.application.value,
            "refrigerant": names[-1],
            "refrigerants": names,
            "gwp": gwp(names[-1]),
            **_mass_view(t, full_ng),
            "chronic": chronic,
            "in_service_at_end": end_state.in_service,
            "placed_in_service_on": end_state.in_service_on
            if end_state.in_service_on and end_state.in_service_on >= start else None,
            "retired_on": end_state.retired_on
            if end_state.retired_on and end_state.retired_on >= start else None,
            "screening_category": categories[h.system.id].value,
            **_check_counts(by_system.get(h.system.id, []), done),
        })

    grouped: dict[str, list[em.Flow]] = defaultdict(list)
    screened: dict[tuple[str, str], list[em.Flow]] = defaultdict(list)
    for f in all_flows:
        grouped[f.refrigerant].append(f)
        screened[(f.refrigerant, categories[f.system_id].value)].append(f)
    by_refrigerant = {}
    for name, group in grouped.items():
        by_refrigerant[name] = _totals(group, gwp)
        by_refrigerant[name]["system_ids"] = sorted({f.system_id for f in group})

    site = histories[0].site if histories else None
    code = site.code if site else ""
    ids = list(sys_totals)
    site_row = None
    if ids or facility:
        t = _merge_totals(list(by_refrigerant.values()))
        full_ng = sum(sys_totals[i]["full_charge_ng"] for i in ids)
        obs = [o for i in ids for o in by_system.get(i, [])] + facility
        site_row = {
            "site": code,
            "name": site.name if site else "",
            "country": site.country if site else "",
            "regimes": list(site.regimes) if site else [],
            "systems": len(ids),
            **_mass_view(t, full_ng),
            "chronic": sum(1 for i in ids if sys_totals[i]["chronic"]),
            **_check_counts(obs, sum(checks_done[i] for i in ids)),
        }
    obligation_rows = [_obligation_row(o, labels, event_days) for o in in_year]
    obligation_rows.sort(key=_row_order)
    return AnnualPart(
        site_code=code,
        systems=systems,
        site_row=site_row,
        by_refrigerant=by_refrigerant,
        by_screening={k: _flow_sums(v) for k, v in screened.items()},
        estate_counts=_check_counts(in_year, sum(checks_done.values())),
        met_late=sum(1 for o in in_year if o.met_by is not None and event_days.get(o.met_by, o.due_on) > o.due_on),
        chronic=sum(1 for t in sys_totals.values() if t["chronic"]),
        full_charge_ng=sum(t["full_charge_ng"] for t in sys_totals.values()),
        monthly_ng={r: dict(m) for r, m in monthly_ng.items()},
        yearly_ng={r: dict(y) for r, y in yearly_ng.items()},
        obligation_rows=obligation_rows,
        notes=list(dict.fromkeys(gwp.notes)),
        heads=[(f"{h.site.code}/{h.system.tag}", chain_head_of(h.events)) for h in histories],
        prohibited=_prohibited(histories, reference, start, end),
    )


def _prohibited(histories: Sequence[SystemHistory], reference: Reference, start: date,
                end: date) -> list[tuple[str, date, int, str]]:
    from ledger.reference.servicing import load_servicing
    from ledger.rules.servicing import prohibited_top_ups

    bans = load_servicing()
    return [(f"{h.site.code}/{h.system.tag}", e.performed_on, e.mass_ng or 0, f.message)
            for h in sorted(histories, key=lambda h: h.system.tag)
            for e, f in prohibited_top_ups(h, reference, bans, start, end)]


def assemble_annual(
    parts: Sequence[AnnualPart],
    reference: Reference,
    *,
    year: int,
    basis: str,
    as_of: date,
    site_code: str | None = None,
    generated_at: datetime | None = None,
) -> dict[str, Any]:
    """The annual loss summary from its sites' parts (pure); see `annual_data`."""
    start, end = date(year, 1, 1), date(year, 12, 31)
    parts = sorted(parts, key=lambda p: p.site_code)
    gwp = _Gwp(reference, basis)
    notes = [n for p in parts for n in p.notes]
    systems = [row for p in parts for row in p.systems]
    sites = [p.site_row for p in parts if p.site_row is not None]

    refrigerants: list[dict[str, Any]] = []
    grouped: dict[str, list[dict[str, Any]]] = defaultdict(list)
    for p in parts:
        for name, t in p.by_refrigerant.items():
            grouped[name].append(t)
    merged = {name: _merge_totals(ts) for name, ts in grouped.items()}
    for name in sorted(grouped):
        t = merged[name]
        refrigerants.append({
            "refrigerant": name,
            "gwp": gwp(name),
            "systems": sum(len(x["system_ids"]) for x in grouped[name]),
            **_mass_view(t, t["last_charge_ng"]),
        })

    et = _merge_totals(list(merged.values()))
    counts = {key: sum(p.estate_counts[key] for p in parts) for key in _COUNT_KEYS}
    estate = {
        "systems": len(systems),
        "sites": len(sites),
        **_mass_view(et, sum(p.full_charge_ng for p in parts)),
        "chronic": sum(p.chronic for p in parts),
        **counts,
        "met_late": sum(p.met_late for p in parts),
        "prohibited_top_ups": sum(len(p.prohibited) for p in parts),
        "prohibited_top_up_kg": em.kg(sum(mg for p in parts for _, _, mg, _ in p.prohibited)),
    }

    # scope 1: the three methods read sums only, so one merged flow per refrigerant and
    # screening row stands for all of them (C x T: the sum of ng-days over the year's days)
    screened: dict[tuple[str, str], list[int]] = {}
    for p in parts:
        for k, sums in p.by_screening.items():
            into = screened.get(k)
            screened[k] = list(sums) if into is None else [a + b for a, b in zip(into, sums, strict=True)]
    period_days = (end - start).days + 1
    merged_flows = []
    categories: dict[int, em.ScreeningCategory] = {}
    for i, ((name, category), totals) in enumerate(screened.items()):
        summed: dict[str, Any] = dict(zip(_SUMMED_FLOW_FIELDS, totals, strict=True))
        merged_flows.append(em.Flow(-1 - i, name, period_days, **summed))
        categories[-1 - i] = em.ScreeningCategory(category)
    ods = frozenset(n for n in grouped if n in reference.refrigerants
                    and reference.chem_classes(n) & {"HCFC", "CFC"})
    methods = em.scope1(merged_flows, {n: gwp(n) for n in grouped}, categories, ods)
    recommended, why = em.recommended_method(merged_flows)
    monthly_ng: dict[str, dict[int, int]] = defaultdict(lambda: defaultdict(int))
    yearly_ng: dict[str, dict[int, int]] = defaultdict(lambda: defaultdict(int))
    for p in parts:
        for r, per in p.monthly_ng.items():
            for month, ng in per.items():
                monthly_ng[r][month] += ng
        for r, per in p.yearly_ng.items():
            for y, ng in per.items():
                yearly_ng[r][y] += ng
    monthly = []
    for month in range(1, 13):
        ng = sum(monthly_ng[r][month] for r in monthly_ng)
        monthly.append({
            "month": f"{year}-{month:02d}",
            "added_kg": em.kg(ng),
            "co2e_t": rounded(_sum(em.co2e_t(em.kg(monthly_ng[r][month]), gwp(r))
                                   for r in monthly_ng), CO2E_PLACES),
        })
    first_year = min((y for per in yearly_ng.values() for y in per), default=year)
    trend = [
        {
            "year": y,
            "added_kg": em.kg(sum(per.get(y, 0) for per in yearly_ng.values())),
            "co2e_t": rounded(_sum(em.co2e_t(em.kg(per.get(y, 0)), gwp(r))
                                   for r, per in yearly_ng.items()), CO2E_PLACES),
        }
        for y in range(first_year, year + 1)
    ]
    obligation_rows = [row for p in parts for row in p.obligation_rows]
    obligation_rows.sort(key=_row_order)  # each part's rows are in this order already: runs merge
    heads = sorted(h for p in parts for h in p.heads)
    return {
        "report": "annual-loss-summary",
        "year": year,
        "period": {"from": start, "to": end},
        "basis": basis,
        "chronic_percent": CHRONIC_INDICATOR_PERCENT,  # the share behind every "chronic" figure
        "site_filter": site_code,
        "as_of": as_of,
        "systems": systems,
        "sites": sites,
        "refrigerants": refrigerants,
        "estate": estate,
        "scope1": [method_json(m) for m in methods],
        "scope1_recommended": {"method": recommended, "why": why},
        "monthly": monthly,
        "trend": trend,
        "obligations": obligation_rows,
        "prohibited_top_ups": [
            {"system": label, "on": on, "added_kg": em.kg(mg), "warning": message}
            for p in parts for label, on, mg, message in p.prohibited
        ],
        "notes": list(dict.fromkeys(notes + gwp.notes)),
        "chain": _digest_of_heads(heads),
        "generated_at": generated_at,
        "version": __version__,
        "caution": CAUTION,
    }


_COUNT_KEYS = ("checks_required", "checks_done", "checks_missed", "overdue")
_SUMMED_FLOW_FIELDS = tuple(
    f.name for f in fields(em.Flow) if f.name not in ("system_id", "refrigerant", "period_days", "recovered_to")
)


def _flow_sums(flows: Sequence[em.Flow]) -> tuple[int, ...]:
    """Each integer field of a group of flows, summed (recovered_to is not used by scope 1)."""
    return tuple(sum(getattr(f, name) for f in flows) for name in _SUMMED_FLOW_FIELDS)


def _row_order(row: Mapping[str, Any]) -> tuple[Any, ...]:
    return (row["due_on"], row["site"] or "", row["system"] or "", row["kind"])


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
        company_certificates: every company certificate (the one valid on an event's day is
            printed beside the company, 517/2014 Art 6(1)(e)).
    Returns:
        The JSON contract: year, basis, systems, sites, refrigerants, estate, scope1, caution
        and further keys (see docs/reports.md).
    """
    parts = _parts_of(histories, obligations, reference, year=year, basis=basis)
    return assemble_annual(parts, reference, year=year, basis=basis, as_of=as_of or date(year, 12, 31),
                           site_code=site_code, generated_at=generated_at)


def method_json(m: em.MethodResult) -> dict[str, Any]:
    """One scope-1 method result as plain data.

    The total in kg is the sum of the rounded refrigerant rows it counts (those of 0 or more),
    so the printed rows add up to the printed total (rounding the exact total could differ from
    that sum by a milligram)."""
    parts: list[dict[str, Any]] = [
        {
            "refrigerant": p.refrigerant,
            "category": p.category,
            "inputs": {k: rounded(v, KG_PLACES) for k, v in p.inputs_kg},
            "emissions_kg": rounded(p.emissions_kg, KG_PLACES),
            "gwp": p.gwp,
            "co2e_t": rounded(p.co2e_t, CO2E_PLACES),
        }
        for p in m.parts
    ]
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
        "by_refrigerant": parts,
        "emissions_kg": _sum(r["emissions_kg"] for r in parts if r["emissions_kg"] >= 0),
        "co2e_t": rounded(m.co2e_t, CO2E_PLACES),
        "outside_scope1": [
            {"refrigerant": p.refrigerant, "category": p.category,
             "emissions_kg": rounded(p.emissions_kg, KG_PLACES), "gwp": p.gwp,
             "co2e_t": rounded(p.co2e_t, CO2E_PLACES)}
            for p in m.outside_scope1
        ],
        "flags": list(m.flags),
    }


def _digest_of_heads(heads: Sequence[tuple[str, str | None]]) -> dict[str, Any]:
    """The chain digest of a report: `integrity.heads_digest`, the one `verify` prints."""
    from ledger.services.integrity import heads_digest

    found = {name: head for name, head in heads if head is not None}
    return {"systems": len(found), "digest": heads_digest(found)}


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
    recompute: bool = False,
) -> dict[str, Any]:
    """The annual loss summary of the estate (or one site).

    Each site's part is read from `kept_annual` when it is current (same as-of day, same
    records, filings, episodes and rules); the other sites' histories are loaded, their rules
    run and their parts built, then kept for the next summary of the year.

    Args:
        year: the calendar year.
        site_code: limit to one site.
        basis: GWP basis; default ``default_basis`` of the systems in scope.
        as_of: the day obligations are evaluated on; default the year's last day, or today
            for the current year.
        recompute: ignore kept parts: build every site's part from its records (and keep it).
    """
    if not 1900 < year < 2200:
        raise InputError("--year", year, "is not a plausible year")
    with repo.gc_paused():
        return _annual_summary(db, year=year, site_code=site_code, basis=basis, as_of=as_of, recompute=recompute)


def _annual_summary(db: Database, *, year: int, site_code: str | None, basis: str | None,
                    as_of: date | None, recompute: bool) -> dict[str, Any]:
    from ledger.services.kept import annual_parts

    reference = load_reference()
    as_of = as_of or min(date(year, 12, 31), today_utc())
    parts, chosen = annual_parts(
        db, year=year, as_of=as_of, site_code=site_code, recompute=recompute, part_type=AnnualPart,
        basis=lambda sites: check_basis(basis) if basis else default_basis_of_sites(sites),
        fresh=lambda conn, site_ids, chosen: _fresh_parts(conn, site_ids, reference, year=year, basis=chosen,
                                                          as_of=as_of, site_code=site_code),
    )
    summary = assemble_annual(parts, reference, year=year, basis=chosen, as_of=as_of, site_code=site_code,
                              generated_at=utc_now())
    check = report_check(db, site_code=site_code)
    # every head of an estate is a long list; the digest stands for them (`verify --json` lists them)
    summary["integrity"] = {k: v for k, v in check.items() if k not in ("heads", "covered_names")}
    summary["chain"] = {"systems": summary["integrity"]["systems"], "digest": summary["integrity"]["digest"]}
    return summary


def _fresh_parts(conn: Any, site_ids: list[int], reference: Reference, *, year: int, basis: str, as_of: date,
                 site_code: str | None) -> list[AnnualPart]:
    """The pipeline step `kept.annual_parts` wraps: these sites' parts from their records,
    detector episodes and filings (the rules run on ``as_of``)."""
    from ledger.services.detectors import stored_episodes
    from ledger.services.obligations import Evidence, compute

    histories = repo.load_histories(conn=conn, site_ids=site_ids) if site_ids else []
    if not histories:
        return []
    zones = {h.system.id: h.site.timezone for h in histories}
    episodes = stored_episodes(conn, None if site_code is None else list(zones), zones)  # the few others: unused
    codes = {h.site.code for h in histories}
    filings = [f for f in repo.load_filings(site_code, conn=conn) if f.site_code in codes]
    obligations, _ = compute(histories, as_of, Evidence(episodes, filings))
    return _parts_of(histories, obligations, reference, year=year, basis=basis)


def _parts_of(histories: Sequence[SystemHistory], obligations: Sequence[Obligation], reference: Reference, *,
              year: int, basis: str) -> list[AnnualPart]:
    """One part per site of these histories (and per site named only by a facility duty)."""
    by_site: dict[str, list[SystemHistory]] = defaultdict(list)
    for h in histories:
        by_site[h.site.code].append(h)
    site_of = {h.system.id: h.site.code for h in histories}
    obs_of: dict[str, list[Obligation]] = defaultdict(list)
    for o in obligations:
        code = site_of.get(o.system_id, o.site_code or "") if o.system_id is not None else o.site_code or ""
        obs_of[code].append(o)
    codes = sorted(set(by_site) | set(obs_of))
    parts = []
    for code in codes:
        part = annual_part(by_site.get(code, []), reference, year=year, basis=basis, obligations=obs_of.get(code, []))
        part.site_code = code
        if part.site_row is not None and not part.site_row["site"]:
            part.site_row["site"] = code  # facility duties of a site without systems in scope
        parts.append(part)
    return parts


# --- logbook --------------------------------------------------------------------------------


def _purpose(e: Event, booking: Booking, charged_days: set[date], leak_days: set[date]) -> str:
    """Why refrigerant was added, derived from the record (EU 517/2014 Art 6(b) asks for it)."""
    if e.performed_on in charged_days:
        return "installation"
    return "leak" if booking.state(e.performed_on).open_leaks or e.performed_on in leak_days else "servicing"


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
    company_certificates: Sequence[CompanyCertificate] = (),
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
    booking = book(history)  # folded once: the header state, each row's refrigerant and purpose
    state = booking.state(to_on)
    profile = site_profile(site.regimes)
    basis = profile.gwp_basis
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
            co2e = charge_co2e_t(state.full_charge_ng, gwp)
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
    charged_days = {e.performed_on for e in booking.events if e.kind in charging}
    leak_days = {e.performed_on for e in booking.events if e.kind is EventKind.REPAIR or finds_leak(e)}
    rows = []
    for e in sorted(history.events, key=EVENT_ORDER):
        if e.performed_on > to_on or (from_on is not None and e.performed_on < from_on):
            continue
        void = voided_by.get(e.id)
        cyl = cylinders.get(e.cylinder_id) if e.cylinder_id else None
        rows.append({
            "id": e.id,
            "on": e.performed_on,
            "kind": e.kind.value,
            "kind_label": KIND_LABELS.get(e.kind, e.kind.value),
            "refrigerant": booking.state(e.performed_on).refrigerant,
            "mass_kg": _kg(e.mass_ng),
            "charge_kg": _kg(e.charge_ng),
            "added_for": _purpose(e, booking, charged_days, leak_days)
            if e.kind is EventKind.ADD and not void else None,
            "cylinder": e.cylinder_id,
            "cylinder_kind": cyl.kind.value if cyl else None,
            "cylinder_before_kg": _kg(e.cylinder_before_ng),
            "cylinder_after_kg": _kg(e.cylinder_after_ng),
            "reclaimed": e.reclaimed,
            "facility": e.facility,
            "facility_certificate": e.facility_certificate,
            "result": e.result,
            "location": e.location,
            "method": e.method,
            "destination": e.destination,
            "technician": e.technician,
            "company": e.company,
            "company_certificate": _company_certificate(company_certificates, e.company, e.performed_on),
            "certificate": e.certificate,
            "uncertified": UNCERTIFIED_WORK if (uncertified_work(e) and not void) else None,
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
    if profile.leak_rates:
        leak_rates = [
            {**r, **{k: rounded(r[k], PERCENT_PLACES) for k in
                     ("annualizing_percent", "rolling_percent", "percent")}}
            for r in leak_rates_json(booking, to_on) if from_on is None or r["on"] >= from_on
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
        "full_charge_kg": em.kg(state.full_charge_ng),
        "full_charge_lb": rounded(Decimal(state.full_charge_ng) / Decimal(453_592_370_000), KG_PLACES)
        if profile.leak_rates else None,
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
            {"source": f.source, "message": f.message, "severity": f.severity.value}
            for f in [*findings, *_servicing_findings(history, reference, from_on, to_on)]
        ],
        "companies": [
            {"company": c.company, "scope": c.scope, "certificate": c.number, "issuer": c.issuer,
             "valid_from": c.valid_from, "valid_to": c.valid_to}
            for c in company_certificates if c.company in {e.company for e in history.events if e.company}
        ],
        "chain_head": chain_head_of(history.events),
        "events_total": len(history.events),
        # the record items the site's regimes ask for and where this logbook shows each (none: no map)
        "record_title": profile.record_title,
        "record_items": [list(item) for item in profile.record_items],
        "generated_at": generated_at,
        "version": __version__,
        "caution": CAUTION,
    }


def report_check(db: Database, *, site_code: str | None = None, system_ids: list[int] | None = None
                 ) -> dict[str, Any]:
    """What a report prints about the chains it was made from, recomputed now.

    Recomputes the event chains of the report's systems (the site's, or these systems'), the
    record chain (the site's records and those of no site), the database guards, and the
    systems' heads against the newest stored checkpoint (its signature checked against the
    key stored with it).

    Returns:
        ``verified`` (bool), ``problems`` (one line each), ``digest`` (``heads_digest`` of the
        systems in scope), ``systems``, ``heads``, ``records_head`` and ``checkpoint`` (None, or
        id, made_at, key_id, merkle_root and how many of the report's systems it covers).
    """
    from ledger.services.checkpoints import check_signature, newest_checkpoint
    from ledger.services.integrity import verify

    newest = newest_checkpoint(db)
    signed = check_signature(newest) if newest is not None else None
    statement = newest.statement if newest is not None and signed is not None and signed.ok else None
    v = verify(db, site_code=site_code, system_ids=system_ids, checkpoint=statement, kept=False)
    problems = v.problems()
    if newest is not None and signed is not None and not signed.ok:
        problems.append(f"checkpoint {newest.id}: {signed.problems[0]}")
    cover = None
    if newest is not None and statement is not None:
        covered = sorted(name for name in v.heads if name in statement["chains"])
        cover = {"id": newest.id, "made_at": newest.made_at, "key_id": newest.key_id,
                 "merkle_root": statement["merkle_root"], "covers": len(covered), "of": len(v.heads)}
    else:
        covered = []
    return {"verified": not problems, "problems": problems, "digest": v.digest, "systems": v.systems,
            "heads": v.heads, "records_head": v.records_head, "checkpoint": cover, "covered_names": covered}



def _one_system(check: Mapping[str, Any], name: str, names: set[str]) -> dict[str, Any]:
    """A site's report check narrowed to one system's logbook: its own chain's problems and the
    site's record and guard problems, not its neighbours' chains."""
    from ledger.services.integrity import heads_digest

    problems = [p for p in check["problems"]
                if system_named(p.removeprefix("checkpoint, "), names) in (None, name)]
    heads = {name: check["heads"][name]} if name in check["heads"] else {}
    cover = check["checkpoint"]
    if cover is not None:
        cover = {**cover, "covers": int(name in check["covered_names"]), "of": 1}
    narrowed = {k: v for k, v in check.items() if k != "covered_names"}
    return {**narrowed, "problems": problems, "verified": not problems, "heads": heads, "systems": len(heads),
            "digest": heads_digest(heads), "checkpoint": cover}


def system_named(text: str, names: Set[str]) -> str | None:
    """The system (``SITE/TAG``, one of ``names``) a finding source or problem line starts with.

    A name counts only when the end of the text, a space or a ':' follows it, and the longest
    such name wins: tag ``LT`` does not claim ``LT-RACK``'s lines (nor ``LT 2``'s). None when
    the text names no system (site-wide lines).
    """
    ends = [i for i, c in enumerate(text) if c in " :"]
    for end in (len(text), *reversed(ends)):
        if text[:end] in names:
            return text[:end]
    return None


def _servicing_findings(history: SystemHistory, reference: Reference, from_on: date | None,
                        to_on: date) -> list[Finding]:
    from ledger.reference.servicing import load_servicing
    from ledger.rules.servicing import prohibited_top_ups

    return [f for _, f in prohibited_top_ups(history, reference, load_servicing(), from_on, to_on)]


UNCERTIFIED_WORK = "warning: no certificate valid for this work; done by an uncertified person"


def _company_certificate(certs: Sequence[CompanyCertificate], company: str | None, on: date) -> str | None:
    found = [c for c in certs if c.company == company and c.valid_on(on)]
    return f"{found[-1].scope} {found[-1].number}" if found else None


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
        companies = repo.company_certificates(conn=conn)
    histories, evidence = load_evidence(db, site_code=None if tag else site_code, system_id=system_id)
    if not histories:
        return []
    to_day = _period(histories[0], from_on, to_on)
    obligations, findings = compute(histories, to_day, evidence)
    now = utc_now()
    site_check = report_check(db, site_code=histories[0].site.code,
                              system_ids=[histories[0].system.id] if tag is not None else None)
    names = {f"{h.site.code}/{h.system.tag}" for h in histories}
    checks = {h.system.id: _one_system(site_check, f"{h.site.code}/{h.system.tag}", names) for h in histories}
    found: dict[str | None, list[Finding]] = defaultdict(list)
    for f in findings:
        found[system_named(f.source, names)].append(f)
    books = [
        logbook_data(h, reference, from_on=from_on, to_on=to_day, obligations=obligations,
                     cylinders=cylinders, generated_at=now, company_certificates=companies,
                     findings=found[f"{h.site.code}/{h.system.tag}"])
        for h in histories
    ]
    for h, page in zip(histories, books, strict=True):
        page["integrity"] = checks[h.system.id]
    return books
