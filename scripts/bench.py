"""Benchmark: a synthetic retail estate, bulk-loaded, and the estate-wide commands against floors.

The estate is invented data for benchmarking only. At ``--scale 1`` it has 1 000 sites (EU,
GB, US and California stores), 30 systems per site (central plants, condensing units, plug-in
cabinets, split air conditioning, chillers, process and transport units) and about 1.16 million
events over five years: periodic leak checks, leaks found and repaired, top-ups (some by
cylinder weights), follow-up checks, detection-system checks, recoveries, retrofits,
retirements, revised charges and voids. It is deterministic: the same scale always gives the
same rows and the same chain hashes (site ``i`` draws from its own seeded stream, so a smaller
scale is a prefix of a larger one).

It is loaded in bulk (raw ``executemany`` for SQLite, ``COPY`` for PostgreSQL) with every
event's chain hash computed by ``ledger.store.chain.link``, then each operation and its floor
run in a child process of their own, so each peak RSS is the operation's own:

============= ================================================================================
due-first     ``obligations.due`` over the estate on a ledger with nothing kept (the first run
              after a bulk load or an upgrade: every rule over every history, and the rows
              kept) / the due floor; reported without a goal
due           ``obligations.due`` over the estate again (the obligations kept by the first run,
              no record changed since: the everyday case) / one SQL query reading the event
              columns the rules use into memory
due-page      the web app's estate due page (``GET /due``, logged in as an officer, through the
              framework's test client: session check, the service call, sorting, the first page
              of 50 rows rendered) / the ``obligations.due`` call it wraps; the fastest of
              three calls on each side
summary-first ``reporting.annual_summary`` (no file) with nothing kept (every history
              folded, every rule run, each site's part kept) / the summary floor; no goal
summary       ``reporting.annual_summary`` again (the sites' parts kept by the first run, no
              record changed since) / one hand-written GROUP BY giving the added, recovered and
              checks-done totals by site and refrigerant
xlsx          ``exports.xlsx.write_annual_xlsx`` / the same cells written with openpyxl's
              write-only mode
import        ``importing.import_files`` of an events CSV (100 000 rows at scale 1) / pandas
              ``read_csv`` plus one ``executemany`` insert of the very rows the import writes
log-add       ``refledger --db ... log add ...`` as a whole process / ``python -c "import typer,
              sqlalchemy"``
verify        ``integrity.verify`` of every chain / one SQL query of the hashed columns plus
              SHA-256 over the same canonical bytes (``chain.link`` per row)
help          ``refledger --help`` as a whole process / the same floor as log-add
============= ================================================================================

Usage::

    .venv/bin/python scripts/bench.py --scale 0.1
    .venv/bin/python scripts/bench.py --scale 0.1,0.3,1 --backends sqlite,postgresql --json

PostgreSQL: ``$REFLEDGER_TEST_PG_URL`` if set (a scratch database is created in that server
and dropped afterwards), else a throwaway server started from /usr/lib/postgresql/*/bin as
``scripts/test`` does. Timings vary by about ±20 % from run to run on a small machine; results,
machine and method are in docs/performance.md.
"""

from __future__ import annotations

import argparse
import io
import json
import os
import random
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

SEED = 20_261_031
SITES_PER_SCALE = 1_000
SYSTEMS_PER_SITE = 30
IMPORT_ROWS_PER_SCALE = 100_000
# The five years of records. If the machine's clock is not yet past END + 30 days (the import
# and `log add` rows are dated in the month after END, and the ledger refuses future dates),
# the whole calendar moves back by whole years; the output says so.
START, END = date(2021, 11, 1), date(2026, 10, 31)
PROCESS_REPEATS = 5  # `log add` and `--help`: median of this many runs
PAGE_CALLS = 3  # `due-page`: the fastest of this many calls, on both sides (one process each)

GOALS: dict[str, float | None] = {
    "due-first": None,  # reported, no goal: the first `due` after a bulk load computes and keeps
    "due": 2.0,
    "due-page": 1.5,  # the web app's due page (kept rows) / the `obligations.due` call it wraps
    "summary-first": None,  # reported, no goal: the first summary of the year builds and keeps
    "summary": 1.5,
    "xlsx": 1.5,
    "import": 3.0,
    "log-add": 2.0,
    "verify": 2.0,
    "help": 1.5,
}
MEASUREMENTS = tuple(GOALS)
DB_FREE = {"xlsx", "help"}  # do not touch the database: measured once, not per backend

EVENT_COLUMNS = (
    "id", "system_id", "kind", "performed_on", "recorded_at", "mass_ng", "refrigerant",
    "charge_ng", "result", "location", "method", "destination", "cylinder_id",
    "cylinder_before_ng", "cylinder_after_ng", "technician_id", "certificate_id", "recorded_by",
    "note", "voids_id", "reason", "attachments", "reclaimed", "content_key", "prev_hash",
    "chain_hash",
)
# What the rules read of an event (the `due` floor reads exactly these).
RULE_COLUMNS = ("id", "system_id", "kind", "performed_on", "mass_ng", "refrigerant",
                "charge_ng", "result", "location", "voids_id")


# --- the calendar ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Calendar:
    start: date
    end: date
    shift_years: int

    @property
    def as_of(self) -> date:
        """The day `due` is evaluated on (and `log add` is dated)."""
        return self.end + timedelta(days=30)

    @property
    def year(self) -> int:
        """The year of the annual summary: the last full calendar year of records."""
        return self.end.year - 1


def calendar_for(today: date) -> Calendar:
    shift = 0
    while _years_back(END, shift) + timedelta(days=30) > today:
        shift += 1
    return Calendar(_years_back(START, shift), _years_back(END, shift), shift)


def _years_back(day: date, years: int) -> date:
    try:
        return day.replace(year=day.year - years)
    except ValueError:  # 29 February
        return day.replace(year=day.year - years, day=28)


# --- the synthetic estate -------------------------------------------------------------------

CR, IPR, CC, TR, OT = ("commercial-refrigeration", "industrial-process", "comfort-cooling",
                       "transport-refrigeration", "other")

# (tag prefix, count per store, application, equipment form, hermetic, charge kg range,
#  refrigerants EU/GB, refrigerants US, routine check months, chance a check finds a leak,
#  top-ups a year without a found leak, leak detection system)
CLASSES: tuple[tuple[Any, ...], ...] = (
    ("RACK", 2, CR, "central-plant", False, (120, 650),
     {"R-744": 35, "R-448A": 25, "R-449A": 15, "R-404A": 15, "R-407F": 10},
     {"R-404A": 30, "R-448A": 30, "R-449A": 20, "R-407A": 10, "R-22": 10}, 1, 0.2, 2.5, True),
    ("CU", 8, CR, "condensing-unit", False, (4, 40),
     {"R-448A": 25, "R-449A": 15, "R-404A": 20, "R-452A": 15, "R-407F": 10, "R-134a": 10,
      "R-290": 5},
     {"R-404A": 35, "R-448A": 25, "R-407A": 15, "R-22": 15, "R-134a": 10}, 1, 0.06, 1.2, False),
    ("PLUG", 10, CR, "self-contained", True, (0.1, 1.2),
     {"R-290": 80, "R-600a": 10, "R-744": 5, "R-134a": 5},
     {"R-290": 60, "R-134a": 30, "R-744": 10}, 6, 0.01, 0.0, False),
    ("AC", 4, CC, "split", False, (2.5, 25),
     {"R-410A": 50, "R-32": 35, "R-407C": 10, "R-22": 5},
     {"R-410A": 60, "R-22": 20, "R-454B": 10, "R-32": 10}, 2, 0.06, 0.1, False),
    ("CH", 2, CC, "chiller", False, (40, 400),
     {"R-134a": 35, "R-513A": 20, "R-1234ze(E)": 20, "R-410A": 15, "R-290": 10},
     {"R-134a": 40, "R-410A": 25, "R-513A": 20, "R-123": 15}, 2, 0.08, 1.0, False),
    ("PROC", 1, IPR, "chiller", False, (150, 1500),
     {"R-717": 60, "R-744": 20, "R-404A": 20}, {"R-717": 50, "R-404A": 30, "R-22": 20},
     1, 0.08, 2.0, True),
    ("TRU", 2, TR, "other", False, (4, 9), {"R-452A": 50, "R-404A": 50},
     {"R-404A": 70, "R-452A": 30}, 3, 0.1, 0.3, False),
    ("MISC", 1, OT, "other", False, (1, 15), {"R-134a": 50, "R-410A": 50},
     {"R-134a": 50, "R-410A": 50}, 6, 0.03, 0.1, False),
)
assert sum(c[1] for c in CLASSES) == SYSTEMS_PER_SITE
RETROFIT_TO = {"R-404A": ("R-448A", "R-449A", "R-452A"), "R-22": ("R-407A", "R-422D"),
               "R-407F": ("R-448A",), "R-410A": ("R-32", "R-454B")}
REGIONS = (  # (country, subdivision, weight)
    ("DE", None, 14), ("FR", None, 8), ("NL", None, 5), ("ES", None, 6), ("IT", None, 6),
    ("PL", None, 4), ("AT", None, 2),
    ("GB", None, 15),
    ("US", "US-TX", 8), ("US", "US-NY", 5), ("US", "US-FL", 6), ("US", "US-IL", 4),
    ("US", "US-GA", 3), ("US", "US-OH", 2), ("US", "US-WA", 2),
    ("US", "US-CA", 10),
)
SCHEMES = {"EU": ("EU 2015/2067", "I"), "GB": ("GB F-gas", "I"),
           "US": ("EPA Section 608", "Universal")}
FIRST = ("Ada", "Bela", "Cato", "Dara", "Edda", "Finn", "Gita", "Hugo", "Ines", "Jon", "Kira",
         "Lars", "Mina", "Nils", "Oda", "Pia", "Quin", "Rosa", "Sven", "Tess", "Ulla", "Vito",
         "Wren", "Yara", "Zeno")
LAST = ("Abelin", "Brandt", "Corvo", "Dunmore", "Eskel", "Falkner", "Garrow", "Holm", "Iversen",
        "Jessop", "Kettle", "Lindqvist", "Marrow", "Norcott", "Orwin", "Pellow", "Quarry",
        "Rask", "Selby", "Thorne", "Ulvang", "Varga", "Wetherby", "Yelland", "Zorzi")
LOCATIONS = ("suction line joint", "Schrader valve", "compressor shaft seal", "evaporator coil",
             "condenser coil", "flare joint", "pressure relief valve", "liquid receiver",
             "sight glass", "capillary tube")
METHODS = ("direct", "direct", "direct", "indirect", "electronic detector")
NOTES = ("", "", "", "", "", "", "", "", "routine visit", "customer reported warm cabinet",
         "access restricted, roof ladder", "parts on order")


def _pick(rng: random.Random, weights: dict[str, int]) -> str:
    return rng.choices(list(weights), weights=list(weights.values()))[0]


def _ng(kg: float) -> int:
    return int(round(kg * 10**12))


@dataclass
class Estate:
    """Every row of the synthetic ledger, in table column order, plus what the import needs."""

    scale: float
    cal: Calendar
    sites: list[tuple] = field(default_factory=list)
    companies: list[tuple] = field(default_factory=list)
    technicians: list[tuple] = field(default_factory=list)
    certificates: list[tuple] = field(default_factory=list)
    cylinders: list[tuple] = field(default_factory=list)
    systems: list[tuple] = field(default_factory=list)
    events: list[tuple] = field(default_factory=list)  # EVENT_COLUMNS, id order
    # per system id: (site code, tag, refrigerant at the end, retired?, has detection, tech id)
    info: dict[int, tuple] = field(default_factory=dict)
    heads: dict[int, str] = field(default_factory=dict)
    tech_names: dict[int, str] = field(default_factory=dict)
    cert_of: dict[int, int] = field(default_factory=dict)  # technician id -> certificate id


class _Builder:
    """Generates one site at a time from the site's own random stream."""

    def __init__(self, estate: Estate) -> None:
        self.e = estate
        self.raw: list[tuple] = []  # (recorded_at, system_id, seq, payload)
        self.cyl_ids: dict[tuple[int, str], int] = {}
        self.crews: list[list[tuple]] = []

    # companies serve ten neighbouring sites of the same region
    def company_for(self, site_no: int, region: str, rng: random.Random) -> list[int]:
        key = site_no // 10
        if len(self.e.companies) <= key:
            cid = len(self.e.companies) + 1
            self.e.companies.append((cid, f"Bench Cooling Contractor {cid:04d}", None))
            techs = []
            scheme, category = SCHEMES[region]
            for _ in range(rng.randint(3, 5)):
                tid = len(self.e.technicians) + 1
                name = f"{rng.choice(FIRST)} {rng.choice(LAST)} {tid:05d}"
                self.e.technicians.append((tid, name, cid))
                valid_from = date(rng.randint(2008, 2016), rng.randint(1, 12), 1)
                valid_to = None
                if rng.random() < 0.1:
                    valid_to = self.e.cal.start + timedelta(days=rng.randint(200, 1500))
                cert_id = len(self.e.certificates) + 1
                self.e.certificates.append(
                    (cert_id, tid, scheme, f"BN-{tid:06d}", category, valid_from, valid_to))
                self.e.tech_names[tid] = name
                self.e.cert_of[tid] = cert_id
                techs.append((tid, valid_from, valid_to))
            self.crews.append(techs)
        return self.crews[key]

    def cylinder(self, company_no: int, refrigerant: str) -> int:
        key = (company_no, refrigerant)
        if key not in self.cyl_ids:
            cid = len(self.e.cylinders) + 1
            self.cyl_ids[key] = cid
            self.e.cylinders.append((cid, f"BC-{company_no:04d}-{refrigerant}", refrigerant,
                                     "virgin", _ng(14.5)))
        return self.cyl_ids[key]

    def site(self, n: int) -> None:
        rng = random.Random(SEED * 1_000_003 + n)
        country, subdivision, _ = rng.choices(REGIONS, weights=[r[2] for r in REGIONS])[0]
        region = "US" if country == "US" else ("GB" if country == "GB" else "EU")
        from ledger.rules import default_regimes
        from ledger.services.places import default_timezone

        site_id = n + 1
        code = f"{(subdivision or country)}-{site_id:05d}"
        zone = default_timezone(country, subdivision)
        method = rng.choice(("annualizing", "rolling")) if country == "US" else "annualizing"
        self.e.sites.append((site_id, code, f"Bench store {site_id:05d}", country, subdivision,
                             zone, ",".join(default_regimes(country, subdivision)), method,
                             "lb" if country == "US" else "kg", _at(self.e.cal.start, 0, 0)))
        crew = self.company_for(n, region, rng)
        company_no = n // 10 + 1
        for (prefix, count, app, form, hermetic, (lo, hi), ref_eu, ref_us, every, p_leak,
             topups, detection) in CLASSES:
            for k in range(count):
                system_id = len(self.e.systems) + 1
                tag = f"{prefix}-{k + 1}"
                self.e.systems.append((
                    system_id, site_id, tag, f"{prefix.lower()} {k + 1}", app, form, hermetic,
                    False, "", "Bench Maker", f"M-{rng.randint(100, 999)}",
                    f"S{system_id:08d}", 6.0 if prefix == "RACK" else None,
                    _at(self.e.cal.start, 0, 0)))
                refs = ref_us if region == "US" else ref_eu
                self.system(rng, system_id, code, tag, _pick(rng, refs), rng.uniform(lo, hi),
                            every, p_leak, topups, detection, crew, company_no)

    def system(self, rng: random.Random, sid: int, site_code: str, tag: str, refrigerant: str,
               charge_kg: float, every: int, p_leak: float, topups: float, detection: bool,
               crew: list, company_no: int) -> None:
        cal = self.e.cal
        span = (cal.end - cal.start).days
        seq = 0
        local: list[list] = []  # payloads, for voids
        first_rec: list[datetime] = []  # nothing is recorded before the in-service event

        def tech_on(day: date) -> tuple[int | None, int | None, str | None]:
            tid, vf, vt = crew[rng.randrange(len(crew))]
            valid = vf <= day and (vt is None or day <= vt)
            name = self.e.tech_names[tid]
            return tid, self.e.cert_of[tid] if valid else None, name

        def emit(day: date, kind: str, *, recorded: datetime | None = None, **f: Any) -> int:
            nonlocal seq
            if recorded is None:
                delay = 0 if rng.random() < 0.7 else rng.randint(1, 12)
                recorded = _at(day + timedelta(days=delay), rng.randint(6, 19), rng.randint(0, 59),
                               rng.randint(0, 999_999))
            if first_rec:
                recorded = max(recorded, first_rec[0] + timedelta(seconds=1 + seq))
            else:
                first_rec.append(recorded)
            tid, cert, name = tech_on(day) if kind != "void" else (None, None, None)
            payload = [day, recorded, kind, f.get("mass"), f.get("refrigerant"), f.get("charge"),
                       f.get("result"), f.get("location"), f.get("method"), f.get("destination"),
                       f.get("cylinder"), f.get("before"), f.get("after"), tid, cert,
                       f.get("by", name), rng.choice(NOTES) if kind != "void" else "",
                       f.get("voids"), f.get("reason"), bool(f.get("reclaimed", False))]
            local.append(payload)
            self.raw.append((recorded, sid, seq, payload))
            seq += 1
            return len(local) - 1

        charge = _ng(charge_kg)
        old = rng.random() < 0.85
        if old:
            placed = date(rng.randint(2000, cal.start.year - 1), rng.randint(1, 12), rng.randint(1, 28))
            placed_rec = _at(cal.start + timedelta(days=rng.randint(0, 30)), 9, 0, rng.randint(0, 999_999))
        else:
            placed = cal.start + timedelta(days=rng.randint(0, span - 60))
            placed_rec = None
        emit(placed, "in-service", recorded=placed_rec, refrigerant=refrigerant, charge=charge)
        has_detection = detection and rng.random() < 0.8
        if has_detection:
            emit(placed, "detection-on", recorded=placed_rec)
        begin = max(placed, cal.start)
        retire_on = None
        if rng.random() < 0.04:
            retire_on = begin + timedelta(days=rng.randint(90, max(91, (cal.end - begin).days - 1)))
        retrofit_on = None
        if refrigerant in RETROFIT_TO and rng.random() < 0.25:
            retrofit_on = begin + timedelta(days=rng.randint(60, max(61, (cal.end - begin).days - 60)))
        stop = min(cal.end, retire_on) if retire_on else cal.end
        current_ref = refrigerant

        # routine checks
        day = begin + timedelta(days=rng.randint(5, 30 * every))
        while day < stop:
            if rng.random() < 0.03:  # a skipped visit
                day = _add_months(day, every)
                continue
            leak = rng.random() < p_leak
            emit(day, "check", result="leak-found" if leak else "no-leak",
                 location=rng.choice(LOCATIONS) if leak else None, method=rng.choice(METHODS))
            if leak:
                fix = day + timedelta(days=rng.randint(0, 20))
                if fix < stop:
                    emit(fix, "repair", location=rng.choice(LOCATIONS))
                    self._add(rng, emit, fix + timedelta(days=rng.randint(0, 2)), charge,
                              0.02, 0.25, current_ref, company_no, stop)
                    fu = fix + timedelta(days=rng.randint(2, 28))
                    if fu < stop:
                        emit(fu, "follow-up", result="fail" if rng.random() < 0.08 else "pass")
            late = rng.randint(20, 60) if rng.random() < 0.03 else rng.randint(-10, 12)
            day = _add_months(day, every) + timedelta(days=late)
            if retrofit_on and day > retrofit_on and current_ref == refrigerant:
                new = rng.choice(RETROFIT_TO[refrigerant])
                emit(retrofit_on, "recover", mass=int(charge * rng.uniform(0.8, 0.98)),
                     destination=rng.choice(("reclaim", "destruction", "returned")))
                charge = int(charge * rng.uniform(0.85, 0.95))
                emit(retrofit_on, "retrofit", refrigerant=new, charge=charge)
                current_ref = new
        # top-ups without a found leak
        for _ in range(_poisson(rng, topups * (stop - begin).days / 365.25)):
            self._add(rng, emit, begin + timedelta(days=rng.randint(0, max(0, (stop - begin).days - 1))),
                      charge, 0.01, 0.12, refrigerant, company_no, stop)
        # detection-system checks
        if has_detection:
            d = _add_months(begin, 12)
            while d < stop:
                emit(d + timedelta(days=rng.randint(-15, 15)), "detection-check")
                d = _add_months(d, 12)
        # occasional recoveries for service work, refilled the same day
        if rng.random() < 0.08 and charge > _ng(2):
            d = begin + timedelta(days=rng.randint(0, max(0, (stop - begin).days - 1)))
            m = int(charge * rng.uniform(0.3, 0.9))
            emit(d, "recover", mass=m, destination="reuse")
            emit(d, "add", mass=m)
        if rng.random() < 0.02:
            charge = int(charge * rng.uniform(0.9, 1.1))
            emit(begin + timedelta(days=rng.randint(0, max(0, (stop - begin).days - 1))),
                 "charge-revised", charge=charge)
        if retire_on:
            emit(retire_on, "retire", mass=int(charge * rng.uniform(0.5, 0.95)),
                 destination=rng.choice(("reclaim", "destruction", "returned")))
        # voids: a wrong entry corrected by voiding it later
        for i, p in enumerate(list(local)):
            if p[2] in ("add", "check") and rng.random() < 0.005:
                when = p[1] + timedelta(days=rng.randint(1, 60), hours=1)
                emit(p[0], "void", recorded=when, voids=i, reason="entered on the wrong system",
                     by="Bench Records Office")
        self.e.info[sid] = (site_code, tag, current_ref, retire_on is not None, has_detection,
                            crew[0][0])

    def _add(self, rng: random.Random, emit: Callable[..., int], day: date, charge: int,
             lo: float, hi: float, refrigerant: str, company_no: int, stop: date) -> None:
        if day >= stop:
            return
        mass = max(_ng(0.05), int(charge * rng.uniform(lo, hi)))
        if rng.random() < 0.25:
            before = _ng(14.5) + mass + _ng(rng.uniform(1, 40))
            emit(day, "add", mass=mass, cylinder=self.cylinder(company_no, refrigerant),
                 before=before, after=before - mass)
        else:
            emit(day, "add", mass=mass, reclaimed=rng.random() < 0.05)

    def finish(self) -> None:
        """Give events ids in recording order and chain each system's events."""
        from ledger.store import chain

        self.raw.sort(key=lambda r: (r[0], r[1], r[2]))
        ids: dict[tuple[int, int], int] = {}
        heads: dict[int, str] = {}
        events = self.e.events
        names = _natural_names(self.e)
        hash_of: dict[int, str] = {}
        for new_id, (recorded, sid, seq, p) in enumerate(self.raw, start=1):
            ids[(sid, seq)] = new_id
            voids = None if p[17] is None else ids[(sid, p[17])]  # a void names its target's seq
            row = {
                # both the row ids and the natural keys, so the hash follows whichever of them
                # chain.CANONICAL_FIELDS names
                "system": names["system"][sid], "technician": names["technician"].get(p[13]),
                "certificate": names["certificate"].get(p[14]),
                "cylinder": names["cylinder"].get(p[10]),
                "voids": None if voids is None else hash_of[voids],
                "system_id": sid, "kind": p[2], "performed_on": p[0], "recorded_at": recorded,
                "mass_ng": p[3], "refrigerant": p[4], "charge_ng": p[5], "result": p[6],
                "location": p[7], "method": p[8], "destination": p[9], "cylinder_id": p[10],
                "cylinder_before_ng": p[11], "cylinder_after_ng": p[12], "technician_id": p[13],
                "certificate_id": p[14], "recorded_by": p[15], "note": p[16], "voids_id": voids,
                "reason": p[18], "attachments": "", "reclaimed": p[19],
            }
            prev = heads.get(sid, chain.GENESIS)
            head = chain.link(prev, row)
            heads[sid] = head
            hash_of[new_id] = head
            events.append((new_id, sid, p[2], p[0], recorded, p[3], p[4], p[5], p[6], p[7], p[8],
                           p[9], p[10], p[11], p[12], p[13], p[14], p[15], p[16], voids, p[18],
                           "", p[19], None, prev, head))
        self.e.heads = heads
        self.raw.clear()


def _natural_names(estate: Estate) -> dict[str, dict[int, str]]:
    site_code = {s[0]: s[1] for s in estate.sites}
    return {
        "system": {s[0]: f"{site_code[s[1]]}/{s[2]}" for s in estate.systems},
        "technician": {t[0]: t[1] for t in estate.technicians},
        "certificate": {c[0]: f"{c[2]}|{c[3]}" for c in estate.certificates},
        "cylinder": {c[0]: c[1] for c in estate.cylinders},
    }


def _at(day: date, hour: int, minute: int, micro: int = 0) -> datetime:
    return datetime(day.year, day.month, day.day, hour, minute, 0, micro, tzinfo=UTC)


def _add_months(day: date, months: int) -> date:
    from ledger.domain.dates import add_months

    return add_months(day, months)


def _poisson(rng: random.Random, lam: float) -> int:
    # Knuth's method; lam is small here.
    if lam <= 0:
        return 0
    if lam > 30:
        return max(0, int(rng.gauss(lam, lam ** 0.5)))
    limit, k, p = pow(2.718281828459045, -lam), 0, 1.0
    while True:
        p *= rng.random()
        if p <= limit:
            return k
        k += 1


def generate(scale: float, cal: Calendar) -> Estate:
    """The synthetic estate at a scale (1 = 1 000 sites); deterministic."""
    estate = Estate(scale, cal)
    b = _Builder(estate)
    n_sites = max(1, round(SITES_PER_SCALE * scale))
    for n in range(n_sites):
        b.site(n)
    b.finish()
    return estate


# --- the import file ------------------------------------------------------------------------


def import_rows(estate: Estate, n_rows: int) -> tuple[list[dict[str, str]], list[tuple], list[str]]:
    """``n_rows`` event rows for in-service systems, dated in the month after the records end.

    Returns:
        (CSV rows as dicts, the event rows the import will write in EVENT_COLUMNS order minus
        ``id`` -- the floor inserts exactly these -- and the CSV header).
    """
    from ledger.services.importing import content_key
    from ledger.store import chain

    rng = random.Random(SEED + 7)
    cal = estate.cal
    live = [sid for sid, inf in estate.info.items() if not inf[3]]
    header = ["site", "tag", "kind", "on", "mass", "result", "method", "tech", "note"]
    rows: list[dict[str, str]] = []
    final: list[tuple] = []
    heads = dict(estate.heads)
    names = _natural_names(estate)
    recorded = _at(cal.end + timedelta(days=31), 12, 0)
    picks = sorted(rng.choices(live, k=n_rows))
    for sid in picks:
        site_code, tag, _ref, _retired, detection, tech_id = estate.info[sid]
        day = cal.end + timedelta(days=rng.randint(1, 28))
        roll = rng.random()
        cells = {"site": site_code, "tag": tag, "on": day.isoformat(), "mass": "", "result": "",
                 "method": "", "tech": estate.tech_names[tech_id], "note": ""}
        mass_ng = None
        if roll < 0.6 or (roll >= 0.9 and not detection):
            cells.update(kind="check", result="no-leak", method="direct")
        elif roll < 0.9:
            grams = rng.randint(200, 9000)
            cells.update(kind="add", mass=f"{grams} g")
            mass_ng = grams * 10**9
        else:
            cells.update(kind="detection-check")
        cells["note"] = f"contractor upload row {len(rows) + 1}"
        row = {k: cells[k] for k in header}
        rows.append(row)
        key = content_key("events", row)
        cert = estate.cert_of[tech_id]
        valid = _cert_valid(estate, cert, day)
        values = {
            "system_id": sid, "kind": cells["kind"], "performed_on": day, "recorded_at": recorded,
            "mass_ng": mass_ng, "refrigerant": None, "charge_ng": None,
            "result": cells["result"] or None, "location": None, "method": cells["method"] or None,
            "destination": None, "cylinder_id": None, "cylinder_before_ng": None,
            "cylinder_after_ng": None, "technician_id": tech_id,
            "certificate_id": cert if valid else None, "recorded_by": cells["tech"],
            "note": cells["note"], "voids_id": None, "reason": None, "attachments": "",
            "reclaimed": False, "system": names["system"][sid], "technician": cells["tech"],
            "certificate": names["certificate"][cert] if valid else None, "cylinder": None,
            "voids": None,
        }
        prev = heads.get(sid, chain.GENESIS)
        head = chain.link(prev, values)
        heads[sid] = head
        final.append((sid, values["kind"], day, recorded, mass_ng, None, None, values["result"],
                      None, values["method"], None, None, None, None, tech_id,
                      values["certificate_id"], cells["tech"], cells["note"], None, None, "",
                      False, key, prev, head))
    return rows, final, header


def _cert_valid(estate: Estate, cert_id: int, day: date) -> bool:
    c = estate.certificates[cert_id - 1]
    return c[5] <= day and (c[6] is None or day <= c[6])


def write_import_csv(path: Path, rows: list[dict[str, str]], header: list[str]) -> None:
    import csv

    with path.open("w", newline="", encoding="utf-8") as f:
        w = csv.DictWriter(f, fieldnames=header)
        w.writeheader()
        w.writerows(rows)


# --- loading --------------------------------------------------------------------------------

TABLE_COLUMNS = {
    "site": ("id", "code", "name", "country", "subdivision", "timezone", "regimes",
             "leak_rate_method", "mass_unit", "created_at"),
    "company": ("id", "name", "certificate"),
    "technician": ("id", "name", "company_id", "created_at"),
    "certificate": ("id", "technician_id", "scheme", "number", "category", "valid_from",
                    "valid_to"),
    "cylinder": ("id", "code", "refrigerant", "kind", "tare_ng", "created_at"),
    "system": ("id", "site_id", "tag", "description", "application", "equipment_form",
               "hermetic", "residential", "location", "maker", "model", "serial",
               "defrost_every_hours", "created_at"),
    "event": EVENT_COLUMNS,
}


def _table_rows(estate: Estate) -> dict[str, list[tuple]]:
    created = _at(estate.cal.start, 0, 0)
    return {
        "site": estate.sites,
        "company": estate.companies,
        "technician": [(t[0], t[1], t[2], created) for t in estate.technicians],
        "certificate": estate.certificates,
        "cylinder": [(*c, created) for c in estate.cylinders],
        "system": estate.systems,
        "event": estate.events,
    }


def migrate(url: str) -> None:
    from ledger.store.db import Location, upgrade

    upgrade(Location(url, "bench"), backup=False)


def _sqlite_value(v: Any) -> Any:
    if isinstance(v, datetime):
        # SQLAlchemy's SQLite DateTime storage: naive UTC with microseconds.
        return v.astimezone(UTC).strftime("%Y-%m-%d %H:%M:%S.%f")
    if isinstance(v, date):
        return v.isoformat()
    if isinstance(v, bool):
        return int(v)
    return v


def load_sqlite(path: Path, estate: Estate) -> None:
    import sqlite3

    migrate("sqlite:///" + str(path))
    con = sqlite3.connect(path, isolation_level=None)
    con.execute("PRAGMA journal_mode=OFF")
    con.execute("PRAGMA synchronous=OFF")
    con.execute("PRAGMA cache_size=-262144")
    con.execute("BEGIN")
    day_text: dict[Any, Any] = {}
    for table, rows in _table_rows(estate).items():
        cols = TABLE_COLUMNS[table]
        sql = f"INSERT INTO {table} ({', '.join(cols)}) VALUES ({', '.join('?' * len(cols))})"

        def conv(row: tuple) -> tuple:
            out = []
            for v in row:
                if isinstance(v, date):
                    t = day_text.get(v)
                    if t is None:
                        t = day_text[v] = _sqlite_value(v)
                    out.append(t)
                else:
                    out.append(int(v) if isinstance(v, bool) else v)
            return tuple(out)

        con.executemany(sql, map(conv, rows))
    con.execute("COMMIT")
    con.execute("PRAGMA journal_mode=WAL")
    con.close()


def chain_records(url: str) -> None:
    """Give every bulk-loaded record row its first version in the record chain, as the ledger's
    own writers (and migration 0006) do, so `verify` holds on the synthetic estate."""
    from sqlalchemy import select

    from ledger.store.db import Database, Location
    from ledger.store.records import RECORD_TABLES, seal
    from ledger.store.tables import metadata

    db = Database(Location(url, "bench"))
    try:
        with db.write() as conn:
            for name in RECORD_TABLES:
                table = metadata.tables[name]
                seal(name, [i for (i,) in conn.execute(select(table.c.id))], conn=conn)
    finally:
        db.close()


def pg_dsn(url: str) -> str:
    """A libpq connection string from an SQLAlchemy URL."""
    return "postgresql://" + url.split("://", 1)[1]


def load_postgresql(url: str, estate: Estate) -> None:
    import psycopg

    migrate(url)
    with psycopg.connect(pg_dsn(url)) as con:
        with con.cursor() as cur:
            for table, rows in _table_rows(estate).items():
                cols = TABLE_COLUMNS[table]
                with cur.copy(f"COPY {table} ({', '.join(cols)}) FROM STDIN") as copy:
                    for row in rows:
                        copy.write_row(row)
                cur.execute(f"SELECT setval(pg_get_serial_sequence('{table}', 'id'), "
                            f"(SELECT coalesce(max(id), 1) FROM {table}))")
        con.commit()
    with psycopg.connect(pg_dsn(url), autocommit=True) as con:
        con.execute("VACUUM ANALYZE")


# --- PostgreSQL server ----------------------------------------------------------------------


class PgServer:
    """A scratch database: in $REFLEDGER_TEST_PG_URL's server, or in a throwaway server."""

    def __init__(self, workdir: Path) -> None:
        self.workdir = workdir
        self.data: Path | None = None
        self.base = os.environ.get("REFLEDGER_TEST_PG_URL")
        self.created: list[str] = []
        self.pgbin: str | None = None

    def start(self) -> None:
        if self.base:
            self.base = self.base.rsplit("/", 1)[0]
            return
        bins = sorted(Path("/usr/lib/postgresql").glob("*/bin/initdb"))
        if not bins:
            raise RuntimeError("no PostgreSQL: set REFLEDGER_TEST_PG_URL or install postgresql")
        self.pgbin = str(bins[-1].parent)
        self.data = Path(tempfile.mkdtemp(prefix="refledger-bench-pg."))
        import socket

        s = socket.socket()
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
        s.close()
        self._as_pg([f"{self.pgbin}/initdb", "-D", str(self.data), "-U", "postgres",
                     "--auth=trust", "--no-sync", "-E", "UTF8", "--locale=C.UTF-8"])
        opts = (f"-p {port} -k {self.data} -c listen_addresses=127.0.0.1 -c fsync=off "
                "-c shared_buffers=512MB -c maintenance_work_mem=256MB -c max_wal_size=4GB")
        self._as_pg([f"{self.pgbin}/pg_ctl", "-D", str(self.data), "-w", "-l",
                     str(self.data / "server.log"), "-o", opts, "start"])
        self.base = f"postgresql+psycopg://postgres@127.0.0.1:{port}"

    def _as_pg(self, cmd: list[str]) -> None:
        if os.getuid() == 0:
            subprocess.run(["chown", "-R", "postgres:postgres", str(self.data)], check=True)
            cmd = ["runuser", "-u", "postgres", "--", *cmd]
        subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)

    def _admin(self, sql: str) -> None:
        import psycopg

        with psycopg.connect(pg_dsn(f"{self.base}/postgres"), autocommit=True) as con:
            con.execute(sql)

    def create(self, name: str, template: str | None = None) -> str:
        self._admin(f"DROP DATABASE IF EXISTS {name}")
        self._admin(f"CREATE DATABASE {name}" + (f" TEMPLATE {template}" if template else ""))
        self.created.append(name)
        return f"{self.base}/{name}"

    def drop(self, name: str) -> None:
        self._admin(f"DROP DATABASE IF EXISTS {name}")

    def stop(self) -> None:
        for name in reversed(self.created):
            try:
                self.drop(name)
            except Exception:  # best effort on the way out
                pass
        if self.data is not None and self.pgbin is not None:
            try:
                self._as_pg([f"{self.pgbin}/pg_ctl", "-D", str(self.data), "-m", "fast", "stop"])
            finally:
                shutil.rmtree(self.data, ignore_errors=True)


# --- measurements (each runs in a child process) --------------------------------------------


def _peak_rss_mb(who: int = resource.RUSAGE_SELF) -> float:
    """Peak resident memory of this process (or of its largest child), in MB.

    For this process, Linux's VmHWM is used: ``ru_maxrss`` survives fork and exec, so a child
    would report at least the parent's size when it was started (the parent holds the whole
    generated estate). Child processes of a measurement are started while it is small.
    """
    if who == resource.RUSAGE_SELF:
        try:
            for line in Path("/proc/self/status").read_text().splitlines():
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024
        except OSError:
            pass
    rss = resource.getrusage(who).ru_maxrss
    return rss / (1024 * 1024) if sys.platform == "darwin" else rss / 1024


def _connect_raw(url: str):  # type: ignore[no-untyped-def]
    if url.startswith("sqlite"):
        import sqlite3

        return sqlite3.connect(url.split("///", 1)[1])
    import psycopg

    return psycopg.connect(pg_dsn(url))


def _db(url: str):  # type: ignore[no-untyped-def]
    from ledger.store.db import Database, Location

    return Database(Location(url, "bench"))


def child(name: str, side: str, ctx: dict[str, Any]) -> dict[str, Any]:
    """Run one measurement in this process; returns seconds, peak RSS and details."""
    url = ctx.get("url", "")
    cal = Calendar(date.fromisoformat(ctx["start"]), date.fromisoformat(ctx["end"]), 0)
    extra: dict[str, Any] = {}
    if url.startswith("postgresql"):
        import psycopg  # noqa: F401  (driver imports are outside every timing, ours and floor)
    if name in ("due", "due-first"):
        if side == "ours":
            from ledger.services.obligations import due

            db = _db(url)
            if name == "due-first":  # nothing kept, as after a bulk load (outside the timing)
                with db.write() as conn:
                    from ledger.store.tables import kept_finding, kept_obligation, kept_site

                    for table in (kept_obligation, kept_finding, kept_site):
                        conn.execute(table.delete())
            else:
                with db.read() as conn:
                    from sqlalchemy import func, select

                    from ledger.store.tables import kept_site

                    kept = conn.execute(select(func.count()).select_from(kept_site)).scalar_one()
                if not kept:  # `--only due`: keep first, as due-first would have (not timed)
                    due(db, as_of=cal.as_of)
            t0 = time.perf_counter()
            result = due(db, as_of=cal.as_of)
            seconds = time.perf_counter() - t0
            extra = {"rows": len(result.rows), "findings": len(result.findings)}
        else:
            t0 = time.perf_counter()
            con = _connect_raw(url)
            cur = con.cursor()
            cur.execute(f"SELECT {', '.join(RULE_COLUMNS)} FROM event ORDER BY system_id, id")
            rows = cur.fetchall()
            seconds = time.perf_counter() - t0
            extra = {"events": len(rows)}
            con.close()
    elif name == "due-page":
        from ledger.services.obligations import due

        db = _db(url)
        due(db, as_of=cal.as_of)  # kept rows, as the everyday page reads them (not timed)
        if side == "ours":
            from fastapi.testclient import TestClient

            from ledger.errors import Conflict
            from ledger.services.accounts import add_user
            from ledger.store.db import to_url
            from ledger.web.app import Settings, create_app
            from ledger.web.pages import due_page  # noqa: F401  (imports outside the timing)

            secret = "bench-officer-password"
            try:
                add_user(db, name="bench-officer", role="officer", password=secret)
            except Conflict:
                pass
            from ledger.store.db import Location

            client = TestClient(create_app(Settings(location=Location(to_url(url), "bench"))),
                                base_url="http://localhost")
            login = client.get("/login")
            token = login.text.split('name="csrf" value="', 1)[1].split('"', 1)[0]
            client.post("/login", data={"name": "bench-officer", "password": secret, "csrf": token})
            client.get(f"/due?as_of={cal.as_of.isoformat()}")  # templates compiled (not timed)
            times = []
            for _ in range(PAGE_CALLS):
                t0 = time.perf_counter()
                page = client.get(f"/due?as_of={cal.as_of.isoformat()}")
                times.append(time.perf_counter() - t0)
                assert page.status_code == 200, page.text[:500]
            seconds = min(times)
            extra = {"bytes": len(page.content)}
        else:
            times = []
            for _ in range(PAGE_CALLS):
                t0 = time.perf_counter()
                result = due(db, as_of=cal.as_of)
                times.append(time.perf_counter() - t0)
            seconds = min(times)
            extra = {"rows": len(result.rows)}
    elif name in ("summary", "summary-first"):
        if side == "ours":
            import pickle

            from ledger.services.reporting import annual_summary

            db = _db(url)
            if name == "summary-first":  # nothing kept (outside the timing)
                with db.write() as conn:
                    from ledger.store.tables import kept_annual

                    conn.execute(kept_annual.delete())
            else:
                with db.read() as conn:
                    from sqlalchemy import func, select

                    from ledger.store.tables import kept_annual

                    kept = conn.execute(select(func.count()).select_from(kept_annual)).scalar_one()
                if not kept:  # `--only summary`: keep first, as summary-first would have (not timed)
                    annual_summary(db, year=cal.year, as_of=date(cal.year, 12, 31))
            t0 = time.perf_counter()
            summary = annual_summary(db, year=cal.year, as_of=date(cal.year, 12, 31))
            seconds = time.perf_counter() - t0
            est = summary["estate"]
            extra = {"systems": est["systems"], "added_kg": str(est["added_kg"]),
                     "recovered_kg": str(est["recovered_kg"]), "checks_done": est["checks_done"]}
            if ctx.get("pickle"):
                Path(ctx["pickle"]).write_bytes(pickle.dumps(summary))
        else:
            t0 = time.perf_counter()
            con = _connect_raw(url)
            cur = con.cursor()
            cur.execute(_summary_sql(url), _summary_params(url, cal.year))
            rows = cur.fetchall()
            seconds = time.perf_counter() - t0
            extra = {
                "groups": len(rows),
                "added_kg": str(sum(r[2] or 0 for r in rows) / 10**12),
                "recovered_kg": str(sum(r[3] or 0 for r in rows) / 10**12),
                "checks_done": sum(r[4] or 0 for r in rows),
            }
            con.close()
    elif name == "xlsx":
        import pickle

        summary = pickle.loads(Path(ctx["pickle"]).read_bytes())
        out = Path(ctx["workdir"]) / f"annual-{side}.xlsx"
        if side == "ours":
            from ledger.exports.xlsx import write_annual_xlsx

            t0 = time.perf_counter()
            write_annual_xlsx(out, summary)
            seconds = time.perf_counter() - t0
        else:
            from openpyxl import Workbook

            from ledger.exports.frames import annual_sheets
            from ledger.exports.xlsx import annual_notes

            tables = []
            for sheet in annual_sheets(summary):
                keys = [c.key for c in sheet.columns]
                values = [[None if _blank(v) else v for v in row]
                          for row in sheet.frame[keys].itertuples(index=False, name=None)]
                tables.append((sheet.name, sheet.headers, values))
            tables.append(("notes", ["item", "text"], [list(x) for x in annual_notes(summary)]))
            t0 = time.perf_counter()
            wb = Workbook(write_only=True)
            for title, headers, values in tables:
                ws = wb.create_sheet(title=title)
                ws.append(headers)
                for row in values:
                    ws.append(row)
            wb.save(out)
            seconds = time.perf_counter() - t0
        extra = {"bytes": out.stat().st_size}
    elif name == "import":
        path = Path(ctx["csv"])
        if side == "ours":
            from ledger.services.importing import import_files

            db = _db(url)
            t0 = time.perf_counter()
            summary = import_files(db, [path])
            seconds = time.perf_counter() - t0
            extra = {"added": summary.added["events"], "problems": len(summary.problems),
                     "first_problem": summary.problems[0] if summary.problems else None}
        else:
            import pickle

            import pandas as pd

            rows = pickle.loads(Path(ctx["floor_rows"]).read_bytes())
            pd.read_csv(io.StringIO("a,b\n1,2\n"))  # pandas loads its parsers on first use
            cols = EVENT_COLUMNS[1:]
            sqlite = url.startswith("sqlite")
            if sqlite:
                rows = [tuple(_sqlite_value(v) for v in r) for r in rows]
            mark = "?" if sqlite else "%s"
            sql = f"INSERT INTO event ({', '.join(cols)}) VALUES ({', '.join([mark] * len(cols))})"
            t0 = time.perf_counter()
            frame = pd.read_csv(path, dtype=str, keep_default_na=False)
            con = _connect_raw(url)
            cur = con.cursor()
            cur.executemany(sql, rows)
            con.commit()
            seconds = time.perf_counter() - t0
            con.close()
            extra = {"rows": len(frame)}
    elif name in ("log-add", "help"):
        exe = str(Path(sys.executable).with_name("refledger"))
        if side == "ours" and name == "help":
            cmd = [exe, "--help"]
        elif side == "ours":
            cmd = [exe, "--db", url, "log", "add", ctx["log_ref"], "--on", cal.as_of.isoformat(),
                   "--mass", "1.5kg", "--tech", ctx["log_tech"], "--confirm"]  # the runs repeat one event
        else:
            cmd = [sys.executable, "-c", "import typer, sqlalchemy"]
        # Bytecode is cached (in the work folder, not the source tree) as for an installed
        # package, and one untimed run fills the cache and the page cache first.
        env = dict(os.environ, PYTHONPYCACHEPREFIX=str(Path(ctx["workdir"]) / "pycache"))
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        times = []
        for i in range(1 + int(ctx.get("repeats", PROCESS_REPEATS))):
            t0 = time.perf_counter()
            done = subprocess.run(cmd, capture_output=True, text=True, env=env)
            if i:
                times.append(time.perf_counter() - t0)
            if done.returncode != 0:
                raise RuntimeError(f"{' '.join(cmd)} failed: {done.stderr.strip()[-500:]}")
        seconds = statistics.median(times)
        extra = {"runs": [round(t, 3) for t in times]}
        return {"seconds": seconds, "peak_rss_mb": _peak_rss_mb(resource.RUSAGE_CHILDREN),
                "extra": extra}
    elif name == "verify":
        if side == "ours":
            from ledger.services.integrity import verify

            db = _db(url)
            t0 = time.perf_counter()
            result = verify(db)
            seconds = time.perf_counter() - t0
            extra = {"events": result.events, "systems": result.systems, "ok": result.ok}
        else:
            from ledger.store import chain

            sql, cols = _verify_floor_sql(url)  # building the statement is not part of the floor
            t0 = time.perf_counter()
            con = _connect_raw(url)
            cur = con.cursor()
            cur.execute(sql)
            n = 0
            sqlite = url.startswith("sqlite")
            for r in cur:
                row = dict(zip(cols, r, strict=True))
                if sqlite:  # the text SQLite keeps, as the ledger reads it back
                    row["performed_on"] = date.fromisoformat(row["performed_on"])
                    row["recorded_at"] = datetime.fromisoformat(row["recorded_at"])
                    row["reclaimed"] = bool(row["reclaimed"])
                chain.link(row["prev_hash"], row)
                n += 1
            seconds = time.perf_counter() - t0
            extra = {"events": n}
            con.close()
    else:
        raise SystemExit(f"unknown measurement {name}")
    return {"seconds": seconds, "peak_rss_mb": _peak_rss_mb(), "extra": extra}


def _verify_floor_sql(url: str) -> tuple[str, list[str]]:
    """The SELECT that yields every column the chain hashes (natural keys included, where
    chain.CANONICAL_FIELDS names them), compiled for the backend, and its column names."""
    from sqlalchemy import create_engine, select

    from ledger.store import repository as repo
    from ledger.store.tables import event

    stmt = repo.events_with_keys() if hasattr(repo, "events_with_keys") else select(event)
    stmt = stmt.order_by(event.c.system_id, event.c.id)
    dialect = create_engine(url).dialect
    compiled = stmt.compile(dialect=dialect, compile_kwargs={"literal_binds": True})
    return str(compiled), [c.name for c in stmt.selected_columns]


def _blank(v: Any) -> bool:
    try:
        import pandas as pd

        return v is None or (not isinstance(v, (list, dict, tuple)) and bool(pd.isna(v)))
    except (TypeError, ValueError):
        return False


def _summary_sql(url: str) -> str:
    mark = "?" if url.startswith("sqlite") else "%s"
    # Added, recovered and checks done in the year, by site and refrigerant, voids applied; a
    # system's refrigerant is that of its last in-service or retrofit event.
    return f"""
        WITH voided AS (SELECT voids_id AS id FROM event WHERE kind = 'void'),
        gas AS (
            SELECT e.system_id, e.refrigerant FROM event e
            JOIN (SELECT system_id, max(id) AS id FROM event
                  WHERE kind IN ('in-service', 'retrofit') GROUP BY system_id) last
              ON last.id = e.id
        )
        SELECT s.site_id, g.refrigerant,
               sum(CASE WHEN e.kind = 'add' THEN e.mass_ng END) AS added_ng,
               sum(CASE WHEN e.kind IN ('recover', 'retire') THEN e.mass_ng END) AS recovered_ng,
               sum(CASE WHEN e.kind = 'check' THEN 1 ELSE 0 END) AS checks_done,
               count(DISTINCT e.system_id) AS systems
        FROM event e
        JOIN system s ON s.id = e.system_id
        JOIN gas g ON g.system_id = e.system_id
        WHERE e.performed_on BETWEEN {mark} AND {mark}
          AND e.kind <> 'void' AND e.id NOT IN (SELECT id FROM voided)
        GROUP BY s.site_id, g.refrigerant
    """


def _summary_params(url: str, year: int) -> tuple:
    if url.startswith("sqlite"):
        return (f"{year}-01-01", f"{year}-12-31")
    return (date(year, 1, 1), date(year, 12, 31))


# --- the parent -----------------------------------------------------------------------------


def run_child(name: str, side: str, ctx: dict[str, Any]) -> dict[str, Any]:
    cmd = [sys.executable, str(Path(__file__).resolve()), "--child", name, "--side", side,
           "--ctx", json.dumps(ctx)]
    done = subprocess.run(cmd, capture_output=True, text=True, cwd=str(ROOT))
    if done.returncode != 0:
        raise RuntimeError(f"{name}/{side} failed:\n{done.stderr[-3000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def _log(msg: str, quiet: bool) -> None:
    if not quiet:
        print(msg, file=sys.stderr, flush=True)


@contextmanager
def _timer(what: str, quiet: bool) -> Iterator[None]:
    t0 = time.perf_counter()
    yield
    _log(f"  {what}: {time.perf_counter() - t0:.1f} s", quiet)


def _copy_sqlite(src: Path, dst: Path) -> None:
    for suffix in ("", "-wal", "-shm"):
        s = Path(str(src) + suffix)
        if s.exists():
            shutil.copyfile(s, Path(str(dst) + suffix))


def bench_scale(scale: float, backends: Sequence[str], only: Sequence[str], workdir: Path,
                quiet: bool, pg: PgServer | None, keep_db: bool = False,
                repeats: int = PROCESS_REPEATS, rounds: int = 1) -> list[dict[str, Any]]:
    import pickle

    cal = calendar_for(date.today())
    if cal.shift_years:
        _log(f"note: the clock is before {END + timedelta(days=30)}; the estate's calendar is "
             f"moved back {cal.shift_years} year(s)", quiet)
    _log(f"scale {scale}: generating", quiet)
    t0 = time.perf_counter()
    estate = generate(scale, cal)
    gen_s = time.perf_counter() - t0
    n_import = max(100, round(IMPORT_ROWS_PER_SCALE * scale))
    rows, final, header = import_rows(estate, n_import)
    csv_path = workdir / "events.csv"
    write_import_csv(csv_path, rows, header)
    floor_rows = workdir / "import-floor.pickle"
    floor_rows.write_bytes(pickle.dumps(final))
    _log(f"  {len(estate.sites)} sites, {len(estate.systems)} systems, {len(estate.events)} events, "
         f"{n_import} import rows ({gen_s:.1f} s)", quiet)
    # `log add`: a central plant of the first site (the technician is of its crew)
    log_sid = next(sid for sid, inf in estate.info.items() if inf[1] == "RACK-1" and not inf[3])
    site_code, tag, _, _, _, tech_id = estate.info[log_sid]
    base_ctx = {"start": cal.start.isoformat(), "end": cal.end.isoformat(),
                "workdir": str(workdir), "log_ref": f"{site_code}/{tag}",
                "log_tech": estate.tech_names[tech_id], "csv": str(csv_path),
                "floor_rows": str(floor_rows), "repeats": repeats}
    counts = {"sites": len(estate.sites), "systems": len(estate.systems),
              "events": len(estate.events), "import_rows": n_import}
    results: list[dict[str, Any]] = []
    pickled = workdir / "summary.pickle"
    done_db_free: set[str] = set()
    for backend in backends:
        _log(f"scale {scale}: loading {backend}", quiet)
        t0 = time.perf_counter()
        if backend == "sqlite":
            path = workdir / f"bench-{scale}.db"
            for suffix in ("", "-wal", "-shm"):
                Path(str(path) + suffix).unlink(missing_ok=True)
            load_sqlite(path, estate)
            url = "sqlite:///" + str(path)
        else:
            assert pg is not None
            name = f"refledger_bench_{str(scale).replace('.', '_')}"
            url = pg.create(name)
            load_postgresql(url, estate)
        chain_records(url)
        _log(f"  loaded in {time.perf_counter() - t0:.1f} s", quiet)
        for name in only:
            if name in DB_FREE and name in done_db_free:
                continue
            if name == "xlsx" and not pickled.exists():
                _log("  xlsx: needs the summary measurement first; skipped", quiet)
                continue
            ctx = dict(base_ctx, url=url)
            if name in ("summary", "xlsx"):
                ctx["pickle"] = str(pickled)
            ours = floor = None
            for _ in range(rounds):  # ours and floor alternate; the fastest of each is kept
                if name == "import":  # on fresh copies, so both sides start from the same ledger
                    ours_url, floor_url = _import_copies(backend, url, workdir, scale, pg)
                    o = _measure(name, "ours", dict(ctx, url=ours_url), quiet, pg)
                    f = _measure(name, "floor", dict(ctx, url=floor_url), quiet, pg)
                    _drop_copies(backend, [ours_url, floor_url], pg)
                else:
                    o = _measure(name, "ours", ctx, quiet, pg)
                    f = _measure(name, "floor", ctx, quiet, pg)
                if o is None or f is None:
                    ours = floor = None
                    break
                ours = o if ours is None or o["seconds"] < ours["seconds"] else ours
                floor = f if floor is None or f["seconds"] < floor["seconds"] else floor
            if ours is None or floor is None:
                results.append({"name": name, "backend": backend, "scale": scale,
                                "seconds": None, "floor_seconds": None, "ratio": None,
                                "goal": GOALS[name], "peak_rss_mb": None,
                                "note": "pending: the reporting API is not available yet",
                                **counts})
                continue
            row = {
                "name": name,
                "backend": "-" if name in DB_FREE else backend,
                "scale": scale,
                "seconds": round(ours["seconds"], 4),
                "floor_seconds": round(floor["seconds"], 4),
                "ratio": round(ours["seconds"] / floor["seconds"], 2) if floor["seconds"] else None,
                "goal": GOALS[name],
                "peak_rss_mb": round(ours["peak_rss_mb"], 1),
                "floor_peak_rss_mb": round(floor["peak_rss_mb"], 1),
                "detail": {"ours": ours["extra"], "floor": floor["extra"]},
                **counts,
            }
            results.append(row)
            if name in DB_FREE:
                done_db_free.add(name)
            _log(f"  {name:13s} {backend:10s} {row['seconds']:9.3f} s  floor {row['floor_seconds']:8.3f} s"
                 f"  x{row['ratio']}  (goal {_goal(GOALS[name])})  {row['peak_rss_mb']:.0f} MB", quiet)
        if keep_db:
            _log(f"  kept {url}", quiet)
        elif backend == "sqlite":
            for suffix in ("", "-wal", "-shm"):
                Path(str(workdir / f"bench-{scale}.db") + suffix).unlink(missing_ok=True)
        else:
            assert pg is not None
            pg.drop(url.rsplit("/", 1)[1])
    return results


def warm(url: str, pg: PgServer | None) -> None:
    """Read the database's files once, so every measurement starts from a warm page cache.

    Without this the first reader after a pause pays for disk reads: this machine's kernel
    reclaims page cache that has not been touched for a while (an SQLite file read cold took
    eight times as long as warm). A throwaway PostgreSQL's files are read the same way; a server
    named by $REFLEDGER_TEST_PG_URL is left as it is.
    """
    files: list[Path] = []
    if url.startswith("sqlite"):
        base = url.split("///", 1)[1]
        files = [Path(base + suffix) for suffix in ("", "-wal")]
    elif pg is not None and pg.data is not None:
        files = [f for f in (pg.data / "base").rglob("*") if f.is_file()]
    for f in files:
        try:
            with f.open("rb") as fh:
                while fh.read(1 << 23):
                    pass
        except OSError:
            pass


def _measure(name: str, side: str, ctx: dict[str, Any], quiet: bool,
             pg: PgServer | None = None) -> dict[str, Any] | None:
    if name not in DB_FREE:
        warm(ctx["url"], pg)
    try:
        return run_child(name, side, ctx)
    except RuntimeError as exc:
        if name in ("summary", "xlsx") and ("ModuleNotFoundError" in str(exc) or "ImportError" in str(exc)):
            _log(f"  {name}: pending ({str(exc).strip().splitlines()[-1]})", quiet)
            return None
        raise


def _import_copies(backend: str, url: str, workdir: Path, scale: float,
                   pg: PgServer | None) -> tuple[str, str]:
    if backend == "sqlite":
        src = Path(url.split("///", 1)[1])
        out = []
        for side in ("ours", "floor"):
            dst = workdir / f"import-{side}.db"
            _copy_sqlite(src, dst)
            out.append("sqlite:///" + str(dst))
        return out[0], out[1]
    assert pg is not None
    name = url.rsplit("/", 1)[1]
    return pg.create(f"{name}_imp_ours", template=name), pg.create(f"{name}_imp_floor", template=name)


def _drop_copies(backend: str, urls: list[str], pg: PgServer | None) -> None:
    for u in urls:
        if backend == "sqlite":
            for suffix in ("", "-wal", "-shm"):
                Path(u.split("///", 1)[1] + suffix).unlink(missing_ok=True)
        else:
            assert pg is not None
            pg.drop(u.rsplit("/", 1)[1])


CONSTANT_COST = {"log-add", "help"}  # one process each, whatever the estate: shown in seconds


def _scaling(results: list[dict[str, Any]]) -> tuple[list[float], list[tuple[str, str, list[str]]]]:
    """Per measurement and backend, one cell per scale: seconds per million events for the
    estate-wide work (flat when cost grows linearly), plain seconds for the constant-cost ones."""
    scales = sorted({r["scale"] for r in results})
    keys = sorted({(r["name"], r["backend"]) for r in results if r["seconds"] is not None},
                  key=lambda k: (MEASUREMENTS.index(k[0]), k[1]))
    rows = []
    for name, backend in keys:
        cells = []
        for s in scales:
            r = next((x for x in results if x["scale"] == s and x["name"] == name
                      and x["backend"] == backend and x["seconds"] is not None), None)
            if r is None:
                cells.append("-")
            elif name in CONSTANT_COST:
                cells.append(f"{r['seconds']:.2f} s")
            else:
                cells.append(f"{r['seconds'] / r['events'] * 1e6:.1f}")
        rows.append((name, backend, cells))
    return scales, rows


def _goal(goal: float | None) -> str:
    return "-" if goal is None else f"{goal:.1f}"


def print_table(results: list[dict[str, Any]], markdown: bool = False) -> None:
    if markdown:
        print("| S | measurement | backend | seconds | floor s | ratio | goal | peak RSS MB |")
        print("|---|---|---|---:|---:|---:|---:|---:|")
        for r in results:
            if r["seconds"] is None:
                print(f"| {r['scale']} | {r['name']} | {r['backend']} | pending | | | {r['goal']} | |")
                continue
            mark = "" if r["goal"] is None or (r["ratio"] is not None and r["ratio"] <= r["goal"]) else " ✗"
            print(f"| {r['scale']} | {r['name']} | {r['backend']} | {r['seconds']:.3f} | {r['floor_seconds']:.3f} "
                  f"| {r['ratio']:.2f}{mark} | {_goal(r['goal'])} | {r['peak_rss_mb']:.0f} |")
        scales, rows = _scaling(results)
        if len(scales) > 1:
            print()
            print("| measurement | backend | " + " | ".join(f"S = {s}" for s in scales) + " |")
            print("|---|---|" + "---:|" * len(scales))
            for name, backend, cells in rows:
                print(f"| {name} | {backend} | " + " | ".join(cells) + " |")
        return
    head = (f"{'scale':>5} {'measurement':13} {'backend':10} {'seconds':>9} {'floor s':>9} "
            f"{'ratio':>7} {'goal':>5} {'peak MB':>8}  events")
    print(head)
    print("-" * len(head))
    for r in results:
        if r["seconds"] is None:
            print(f"{r['scale']:>5} {r['name']:13} {r['backend']:10} {'pending':>9}")
            continue
        flag = "" if r["goal"] is None or (r["ratio"] is not None and r["ratio"] <= r["goal"]) else " *"
        print(f"{r['scale']:>5} {r['name']:13} {r['backend']:10} {r['seconds']:9.3f} "
              f"{r['floor_seconds']:9.3f} {r['ratio']:7.2f} {_goal(r['goal']):>5} {r['peak_rss_mb']:8.0f}"
              f"  {r['events']}{flag}")
    scales, rows = _scaling(results)
    if len(scales) > 1:
        print()
        print("scaling: seconds per million events (flat = linear cost); log-add and help in seconds")
        print(f"{'measurement':13} {'backend':10} " + " ".join(f"{'S=' + str(s):>10}" for s in scales))
        for name, backend, cells in rows:
            print(f"{name:13} {backend:10} " + " ".join(f"{c:>10}" for c in cells))


def main(argv: Sequence[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--scale", default="1", help="estate size, 1 = 1 000 sites; comma-separate "
                   "several to see the scaling (e.g. 0.1,0.3,1)")
    p.add_argument("--backends", default="sqlite,postgresql")
    p.add_argument("--only", default=",".join(MEASUREMENTS),
                   help=f"measurements to run (default all: {','.join(MEASUREMENTS)})")
    p.add_argument("--json", action="store_true", help="print the results as a JSON list")
    p.add_argument("--repeats", type=int, default=PROCESS_REPEATS,
                   help=f"timed runs of each whole-process command (median; default {PROCESS_REPEATS})")
    p.add_argument("--rounds", type=int, default=1,
                   help="run each measurement and its floor this many times, alternating, and keep "
                   "the fastest of each (damps interference from other work on the machine)")
    p.add_argument("--workdir", type=Path, help="keep files here (default: a temporary folder)")
    p.add_argument("--quiet", action="store_true", help="no progress on stderr")
    p.add_argument("--keep-db", action="store_true",
                   help="keep the SQLite file in --workdir (for profiling); implies sqlite only")
    p.add_argument("--report", nargs="+", type=Path, metavar="JSON",
                   help="print the table (and scaling) of earlier --json outputs; runs nothing")
    p.add_argument("--markdown", action="store_true", help="with --report: Markdown tables")
    p.add_argument("--child", help=argparse.SUPPRESS)
    p.add_argument("--side", help=argparse.SUPPRESS)
    p.add_argument("--ctx", help=argparse.SUPPRESS)
    args = p.parse_args(argv)
    if args.child:
        print(json.dumps(child(args.child, args.side, json.loads(args.ctx))))
        return 0
    if args.report:
        merged = [r for path in args.report for r in json.loads(path.read_text())]
        merged.sort(key=lambda r: r["scale"])  # stable: each run keeps its own order
        print_table(merged, markdown=args.markdown)
        return 0
    scales = [float(s) for s in args.scale.split(",") if s.strip()]
    backends = [b.strip() for b in args.backends.split(",") if b.strip()]
    if args.keep_db:
        if args.workdir is None:
            p.error("--keep-db needs --workdir")
        backends = ["sqlite"]
    only = [m.strip() for m in args.only.split(",") if m.strip()]
    for b in backends:
        if b not in ("sqlite", "postgresql"):
            p.error(f"unknown backend {b!r}")
    for m in only:
        if m not in MEASUREMENTS:
            p.error(f"unknown measurement {m!r}")
    only = [m for m in MEASUREMENTS if m in only]  # xlsx needs summary's pickle: keep the order
    tmp = None
    workdir = args.workdir
    if workdir is None:
        tmp = tempfile.TemporaryDirectory(prefix="refledger-bench.")
        workdir = Path(tmp.name)
    workdir.mkdir(parents=True, exist_ok=True)
    pg = PgServer(workdir) if "postgresql" in backends else None
    results: list[dict[str, Any]] = []
    try:
        if pg is not None:
            pg.start()
        for s in scales:
            results.extend(bench_scale(s, backends, only, workdir, args.quiet, pg, args.keep_db,
                                       args.repeats, args.rounds))
    finally:
        if pg is not None:
            pg.stop()
        if tmp is not None:
            tmp.cleanup()
    if args.json:
        print(json.dumps(results, indent=1, default=str))
    else:
        print_table(results)
    return 0


if __name__ == "__main__":
    sys.exit(main())
