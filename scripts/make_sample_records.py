"""Write the demo records in sample_records/ (scenario: its README.md; columns: docs/import.md).

Deterministic (fixed seed, no clock): `.venv/bin/python scripts/make_sample_records.py`.

Masses are integers in the site's unit (grams at kg sites, ounces at lb sites) until written.
"""

from __future__ import annotations

import csv
import random
from dataclasses import dataclass
from datetime import date, timedelta
from pathlib import Path

OUT = Path(__file__).resolve().parents[1] / "sample_records"
START, END = date(2023, 12, 1), date(2026, 11, 20)  # records begin / last day with events
LEAK_CUTOFF = date(2026, 9, 30)  # random leaks stop here; the open items at the end are explicit
D = date.fromisoformat
CR, IPR, CC = "commercial-refrigeration", "industrial-process", "comfort-cooling"  # application
CP, CU, SC = "central-plant", "condensing-unit", "self-contained"  # equipment form
CH, SP, OT = "chiller", "split", "other"


def table(text: str) -> list[dict[str, str]]:
    """An aligned '|' table (header row first) as a list of dicts."""
    lines = [[c.strip() for c in line.split("|")] for line in text.strip().splitlines()]
    return [dict(zip(lines[0], row, strict=True)) for row in lines[1:]]


SITES = table("""
code   | name                       | country | subdiv | timezone            | method      | unit
DE-LEJ | Leipzig Plagwitz store     | DE      |        | Europe/Berlin       |             | kg
DE-HAJ | Lehrte distribution centre | DE      |        | Europe/Berlin       |             | kg
GB-BRS | Bristol Bedminster store   | GB      |        | Europe/London       |             | kg
TX-HOU | Houston Heights store      | US      | US-TX  | America/Chicago     | annualizing | lb
TX-DAL | Dallas Lakewood store      | US      | US-TX  | America/Chicago     | rolling     | lb
CA-SAC | Sacramento Midtown store   | US      | US-CA  | America/Los_Angeles | annualizing | lb
""")  # method: how the US leak rate is computed at that site
UNIT = {s["code"]: s["unit"] for s in SITES}
RECORDER = {"DE-LEJ": "Greta Lind", "DE-HAJ": "Ilka Brandes", "GB-BRS": "Hollie Marsh",
            "TX-HOU": "Ray Castillo", "TX-DAL": "Ray Castillo", "CA-SAC": "Dana Whitfield"}

TECHS = table("""
    name           | scheme          | certificate    | category  | valid_from | valid_to   | scope
    Jana Köhler    | EU 2015/2067    | DE-I-31742     | I         | 2016-03-14 |            | eu
    Mirko Sandmann | EU 2015/2067    | DE-I-40518     | I         | 2019-09-02 |            | eu
    Priya Lanning  | GB F-gas        | GB-FG-I-208815 | I         | 2018-05-21 |            | gb
    Owen Pryce     | GB F-gas        | GB-FG-I-311094 | I         | 2020-10-01 | 2025-09-30 | gb
    Marisol Vega   | EPA Section 608 | 608-U-5518203  | Universal | 2012-06-08 |            | us-608
    Dwayne Hollis  | EPA Section 608 | 608-1-7730461  | Type I    | 2015-01-20 |            | us-608
    Dwayne Hollis  | EPA Section 608 | 608-2-7730462  | Type II   | 2016-11-03 |            | us-608
    Kenji Arakawa  | EPA Section 608 | 608-U-6604178  | Universal | 2010-04-12 |            | us-608
    Rosa Ibarra    | EPA Section 608 | 608-2-8129955  | Type II   | 2021-02-26 |            | us-608
""")  # scope: where the certificate is valid (eu, gb, us-608)
ISSUER = {  # invented certification bodies, one per contractor's technicians
    "Kälteservice Pleißeaue GmbH": "Kälte-Prüfstelle Westsachsen",
    "Ashgrove Combe Cooling Ltd": "Severnside Refrigeration Assessment",
    "Pecan Flat Mechanical LLC": "Brazos Technician Testing",
    "Tulewind Refrigeration Inc.": "Delta Valley Certification",
}
COMPANY_CERTIFICATES = table("""
    company                     | scope | certificate  | issuer                              | valid_from | valid_to
    Kälteservice Pleißeaue GmbH | eu    | DE-U-SN-0417 | Kälte-Prüfstelle Westsachsen        | 2015-06-01 |
    Ashgrove Combe Cooling Ltd  | gb    | GB-FGC-20931 | Severnside Refrigeration Assessment | 2017-02-13 | 2027-02-12
""")  # written to companies.csv, which `refledger demo` records (the import format has no sheet)
COMPANIES = {  # contractor: (its technicians, the sites it serves)
    "Kälteservice Pleißeaue GmbH": (["Jana Köhler", "Mirko Sandmann"], ["DE-LEJ", "DE-HAJ"]),
    "Ashgrove Combe Cooling Ltd": (["Priya Lanning", "Owen Pryce"], ["GB-BRS"]),
    "Pecan Flat Mechanical LLC": (["Marisol Vega", "Dwayne Hollis"], ["TX-HOU", "TX-DAL"]),
    "Tulewind Refrigeration Inc.": (["Kenji Arakawa", "Rosa Ibarra"], ["CA-SAC"]),
}
CREW = {site: techs for techs, sites in COMPANIES.values() for site in sites}
LAPSED = {t["name"]: D(t["valid_to"]) for t in TECHS if t["valid_to"]}

CYLINDERS = table("""
    id       | site   | refrigerant | kind      | tare       | content
    LEJ-C-01 | DE-LEJ | R-448A      | virgin    | 14.2 kg    | 50 kg
    LEJ-C-02 | DE-LEJ | R-449A      | virgin    | 9.8 kg     | 25 kg
    LEJ-R-01 | DE-LEJ | R-404A      | recovery  | 15.4 kg    | 350 g
    BRS-C-01 | GB-BRS | R-449A      | virgin    | 14.6 kg    | 50 kg
    BRS-R-01 | GB-BRS | R-410A      | recovery  | 12.9 kg    | 0 kg
    HOU-C-01 | TX-HOU | R-22        | reclaimed | 15 lb 8 oz | 30 lb
    HOU-C-02 | TX-HOU | R-404A      | virgin    | 31 lb      | 100 lb
    HOU-C-03 | TX-HOU | R-410A      | virgin    | 12 lb 4 oz | 25 lb
    DAL-C-01 | TX-DAL | R-448A      | virgin    | 31 lb 8 oz | 100 lb
    SAC-C-01 | CA-SAC | R-449A      | virgin    | 31 lb 8 oz | 100 lb
    SAC-R-01 | CA-SAC | R-449A      | recovery  | 48 lb      | 2 lb 4 oz
""")  # content: net mass in the cylinder when the records begin
CAPACITY = {"kg": 60_000, "lb": 1_600}  # what a recovery cylinder may hold (g / oz)


@dataclass(frozen=True)
class Sys:
    site: str
    tag: str
    refrigerant: str
    charge: str
    application: str
    form: str
    in_service: str
    description: str
    location: str = ""
    every: int | None = None  # our routine leak-check interval, months (None: no checks)
    leak: float = 0.0  # chance that a routine check finds a leak
    adds: tuple[str, str] | None = None  # top-up range after a repair (or a relief-valve lift)
    cylinder: str = ""  # cylinder for top-ups by weight
    detection: bool = False
    hermetic: bool = False
    defrost: int | None = None
    tech: str = ""  # who commissioned it
    until: date = END  # routine checks stop after this day (a missed check becomes overdue)
    late: tuple[int, int] | None = None  # (n-th routine check, days after it was due)
    vents: int = 0  # CO2 top-ups after relief-valve lifts, per year
    every_after: tuple[date, int] | None = None  # (from this day, new check interval)
    seed: str = ""  # own random stream (a system added later leaves the others' draws alone)


SYSTEMS = [
    Sys("DE-LEJ", "RACK-1", "R-448A", "380 kg", CR, CP, "2019-04-08", "MT/LT rack, 6 compressors",
        "Roof plant room", every=3, leak=0.15, adds=("2.5 kg", "9 kg"), cylinder="LEJ-C-01",
        detection=True, defrost=6),
    Sys("DE-LEJ", "CU-DAIRY", "R-452A", "30 kg", CR, CU, "2019-04-08", "Dairy cold room",
        "Yard, east wall", every=6, leak=0.1, adds=("800 g", "3.5 kg"), detection=True, defrost=8),
    Sys("DE-LEJ", "CU-FREEZER", "R-404A", "12 kg", CR, CU, "2013-10-21", "Freezer cold room",
        "Yard, east wall", every=6, defrost=6),
    Sys("DE-LEJ", "AC-SALES", "R-32", "12.5 kg", CC, SP, "2021-06-14",
        "Sales floor heat pump (A2L)", "Roof, above entrance", every=12,
        until=D("2025-11-30")),
    Sys("DE-LEJ", "PLUG-ICE", "R-290", "150 g", CR, SC, "2023-05-02",
        "Ice cream plug-in cabinet (A3)", "Aisle 3", hermetic=True),
    Sys("DE-HAJ", "NH3-PLANT", "R-717", "1450 kg", IPR, CP, "2009-09-01",
        "Ammonia plant: frozen store and blast freezers (B2L)", "Machinery room M1", every=1,
        leak=0.03, adds=("15 kg", "45 kg"), detection=True, defrost=12),
    Sys("DE-HAJ", "CO2-DOCK", "R-744", "260 kg", CR, CP, "2020-02-17",
        "Transcritical CO2 rack: chilled dock, ripening rooms", "Machinery room M2", every=3,
        leak=0.08, adds=("6 kg", "22 kg"), detection=True, defrost=8, vents=2),
    Sys("DE-HAJ", "CH-OFFICE", "R-513A", "85 kg", CC, CH, "2017-07-03", "Office chiller",
        "Roof, office block", every=6, leak=0.15, adds=("3 kg", "9 kg"), late=(3, 23),
        until=D("2026-03-31")),
    Sys("DE-HAJ", "CU-RETURNS", "R-407F", "24 kg", CR, CU, "2015-11-09", "Returns cold room",
        "Dock 14", every=12, leak=0.2, adds=("1.5 kg", "4 kg"), late=(2, 9), defrost=6),
    Sys("GB-BRS", "RACK-LT", "R-449A", "165 kg", CR, CP, "2014-03-24", "Low-temperature rack",
        "Plant room", every=3, leak=0.15, adds=("2 kg", "7.5 kg"), cylinder="BRS-C-01", defrost=6),
    Sys("GB-BRS", "RACK-MT", "R-744", "240 kg", CR, CP, "2021-09-06",
        "Transcritical CO2 medium-temperature rack", "Plant room", every=3, leak=0.08,
        adds=("5 kg", "18 kg"), detection=True, defrost=8, vents=2),
    Sys("GB-BRS", "CU-22", "R-22", "5.6 kg", CR, CU, "2001-06-12",
        "Produce prep room (HCFC, awaiting replacement)", "Service yard", every=12),
    Sys("GB-BRS", "ISL-FREEZER", "R-452A", "3.2 kg", CR, SC, "2022-11-14",
        "Island freezer, hermetically sealed and labelled", "Aisle 7", hermetic=True),
    Sys("GB-BRS", "AC-OLD", "R-410A", "14 kg", CC, SP, "2011-05-10",
        "Sales floor air conditioning", "Roof", every=12, until=D("2025-05-19")),
    Sys("GB-BRS", "AC-NEW", "R-454B", "11 kg", CC, SP, "2025-05-28",
        "Sales floor heat pump (A2L), replaced AC-OLD", "Roof", every=12, tech="Priya Lanning"),
    Sys("TX-HOU", "RACK-22", "R-22", "185 lb", CR, CP, "2006-03-15", "Meat and deli rack (HCFC)",
        "Mezzanine plant room", every=3, defrost=6),
    Sys("TX-HOU", "RACK-MT", "R-404A", "480 lb", CR, CP, "2012-10-01", "Medium-temperature rack",
        "Mezzanine plant room", every=3, leak=0.15, adds=("8 lb", "20 lb"), cylinder="HOU-C-02",
        defrost=6),
    Sys("TX-HOU", "RTU-2", "R-410A", "26 lb", CC, OT, "2016-04-18",
        "Packaged rooftop unit, sales floor east", "Roof", every=6),
    Sys("TX-HOU", "CU-DELI", "R-407F", "22 lb", CR, CU, "2019-02-11", "Deli walk-in cooler",
        "Roof", every=6, leak=0.15, adds=("1 lb 8 oz", "3 lb")),
    Sys("TX-DAL", "RACK-B", "R-448A", "600 lb", CR, CP, "2018-09-10", "Combined MT/LT rack",
        "Rear plant room", every=3, cylinder="DAL-C-01", defrost=6),
    Sys("TX-DAL", "AC-1", "R-454B", "20 lb", CC, SP, "2024-04-16",
        "Office and break room heat pump (A2L)", "Roof", every=12, tech="Marisol Vega"),
    Sys("TX-DAL", "RACK-DC", "R-404A", "1650 lb", CR, CP, "2019-05-13",
        "Freezer rack, online-order distribution hall", "Distribution hall plant room", every=3,
        leak=0.15, adds=("10 lb", "30 lb"), defrost=6, seed="TX-DAL/RACK-DC"),
    Sys("TX-DAL", "CU-PROD", "R-452A", "28 lb", CR, CU, "2020-07-20", "Produce cooler", "Roof",
        every=6, leak=0.15, adds=("1 lb 4 oz", "3 lb")),
    Sys("CA-SAC", "RACK-1", "R-449A", "2040 lb", CR, CP, "2016-08-22",
        "Main store rack, 8 compressors", "Plant room", every=1, cylinder="SAC-C-01", defrost=6,
        every_after=(D("2026-03-24"), 3)),
    Sys("CA-SAC", "RACK-CO2", "R-744", "640 lb", CR, CP, "2022-10-03",
        "Transcritical CO2 rack, store extension", "Plant room 2", every=3, leak=0.05,
        adds=("10 lb", "40 lb"), detection=True, defrost=8, vents=2),
    Sys("CA-SAC", "RTU-1", "R-410A", "68 lb", CC, OT, "2015-05-11",
        "Packaged rooftop unit, sales floor", "Roof", every=6, leak=0.15,
        adds=("1 lb", "2 lb 8 oz")),
    Sys("CA-SAC", "PLUG-BEV", "R-290", "5 oz", CR, SC, "2023-08-21",
        "Beverage plug-in cooler (A3)", "Checkout 4", hermetic=True),
]

WHERE = {  # leak locations by equipment form, or by refrigerant for ammonia and CO2
    CP: ["case 12 TXV flare", "LT suction header brazed joint", "oil separator sight glass"],
    CU: ["Schrader valve core", "condenser coil return bend", "liquid line solenoid flare"],
    SP: ["outdoor unit flare nut", "indoor coil return bend", "service port cap seal"],
    CH: ["evaporator end cover gasket", "sight glass gasket", "expansion valve flange"],
    OT: ["evaporator coil return bend", "service valve core", "condenser coil"],
    "R-717": ["oil drain valve, blast freezer 2", "valve stem gland, pump vessel"],
    "R-744": ["gas cooler header flange", "compressor 1 discharge flange", "case 6 EEV fitting"],
}
FIX = {"flare": "flare remade", "valve": "valve core / gland renewed", "sight": "gasket renewed",
       "gasket": "gasket renewed", "flange": "flange gasket renewed"}
METHODS = {"R-717": "ammonia detector and indicator paper",
           "R-744": "electronic detector and bubble solution"}


def q(text: str) -> int:
    """'2.5 kg' -> 2500 (g); '6 lb 8 oz' -> 104 (oz)."""
    parts = text.split()
    per = {"kg": 1000, "g": 1, "lb": 16, "oz": 1}
    return sum(round(float(n) * per[u]) for n, u in zip(parts[::2], parts[1::2], strict=True))


def fmt(value: int, unit: str) -> str:
    """2500 -> '2.5 kg' (unit kg, grams in); 196 -> '12 lb 4 oz' (unit lb, ounces in)."""
    if unit == "kg" and value < 1000:
        return f"{value} g"
    if unit == "kg":
        return f"{value / 1000:.3f}".rstrip("0").rstrip(".") + " kg"
    lb, oz = divmod(value, 16)
    return " ".join(p for p in (f"{lb} lb" if lb else "", f"{oz} oz" if oz or not lb else "") if p)


def add_months(day: date, months: int) -> date:
    """Calendar-month addition, clamped to the month end."""
    y, m = divmod(day.month - 1 + months, 12)
    year, month = day.year + y, m + 1
    last = (date(year + month // 12, month % 12 + 1, 1) - timedelta(days=1)).day
    return date(year, month, min(day.day, last))


def workday(day: date) -> date:
    """The day itself, or the Friday before a weekend."""
    return day - timedelta(max(0, day.weekday() - 4))


class Log:
    """The events of one system, built by its special cases, the routine, then any late case."""

    def __init__(self, s: Sys, rng: random.Random) -> None:
        self.s, self.rng, self.rows = s, rng, []
        self.us = UNIT[s.site] == "lb"

    def aside(self, seed: str) -> Log:
        """This log with its own random stream, for cases added later: the other systems'
        draws stay as they were."""
        other = Log(self.s, random.Random(seed))
        other.rows = self.rows
        return other

    def ev(self, kind: str, on: date, **cells: object) -> None:
        """One event; the technician is the one already there that day, or one on duty."""
        crew = [t for t in CREW[self.s.site] if on <= LAPSED.get(t, END)]
        same_day = self.rows and self.rows[-1]["on"] == on
        tech = self.rows[-1]["tech"] if same_day else self.rng.choice(crew)
        self.rows.append({"site": self.s.site, "tag": self.s.tag, "kind": kind, "on": on,
                          "tech": tech, "by": RECORDER[self.s.site], **cells})

    def check(self, on: date, where: str = "", **cells: object) -> None:
        self.ev("check", on, result="leak-found" if where else "no-leak", where=where,
                method=METHODS.get(self.s.refrigerant, "electronic detector"), **cells)

    def add(self, on: date, mass: int, weigh: bool = False, cylinder: str = "",
            **cells: object) -> None:
        """Refrigerant added: by mass, or (weigh) by the cylinder's weights before/after."""
        cylinder = (cylinder or self.s.cylinder) if weigh else ""
        self.ev("add", on, mass=mass, cylinder=cylinder, _weigh=weigh, **cells)

    def follow(self, on: date, repaired: date, result: str = "pass") -> None:
        if self.us:  # initial verification on the day of the repair, follow-up within 10 days
            self.ev("follow-up", repaired, result="pass", note="initial verification test")
            self.ev("follow-up", on, result=result, note="follow-up verification test")
        else:
            self.ev("follow-up", on, result=result)

    def leak(self, on: date, where: str, repair_in: int, add: int = 0, weigh: bool = False,
             follow_in: int | None = 14, fix: str = "", **add_cells: object) -> None:
        """Leak found -> repair -> top-up -> follow-up check (follow_in None: not done yet)."""
        self.check(on, where)
        fixed = workday(on + timedelta(repair_in))
        fix = fix or next((v for k, v in FIX.items() if k in where), "brazed, pressure-tested")
        self.ev("repair", fixed, where=where, note=fix)
        if add:
            self.add(fixed, add, weigh, **add_cells)
        if follow_in is not None:
            self.follow(workday(fixed + timedelta(follow_in)), fixed)

    def us_cap(self, on: date) -> int:
        """Largest routine top-up that keeps a US leak rate well under its threshold."""
        limit = {CR: 0.2, IPR: 0.3}.get(self.s.application, 0.1) * 0.4 * q(self.s.charge)
        adds = [(r["on"], r["mass"]) for r in self.rows if r["kind"] == "add"]
        last = max([o for o, _ in adds], default=D(self.s.in_service))
        past = sum(m for o, m in adds if (on - o).days < 365)
        return int(min(limit * min((on - last).days, 365) / 365, limit - past))

    def topup(self, on: date) -> int:
        """A routine top-up from the system's range (0: too little to bother with)."""
        lo, hi = (q(x) for x in self.s.adds)
        mass = self.rng.randint(lo, hi)
        mass = min(mass, self.us_cap(on)) if self.us else mass // 10 * 10
        return mass if mass >= lo // 2 else 0


def routine(log: Log) -> None:
    """Routine leak checks (a few finding leaks), detection-system checks, CO2 top-ups."""
    s, rng = log.s, log.rng
    special = sorted({r["on"] for r in log.rows})
    checks = sorted({r["on"] for r in log.rows if r["kind"] == "check"})

    def quiet(day: date) -> bool:  # no special case within 45 days
        return all(abs((day - x).days) > 45 for x in special)

    begin = max(START, D(s.in_service))
    if s.every:  # records begin with a baseline check when the paper logbook was transferred
        first = D(s.in_service) < START
        day = START + timedelta(rng.randint(1, 14)) if first else add_months(begin, s.every)
        n = 1
        while (day := workday(day)) <= s.until and day <= END:
            ahead = 0 if s.every == 1 else 14  # a monthly round must not slip
            near = [c for c in checks if -30 <= (c - day).days <= ahead]
            if near:  # an explicit check stands in for this one
                day = near[0]
                checks.remove(day)
            elif s.adds and day < LEAK_CUTOFF and quiet(day) and rng.random() < s.leak:
                log.leak(day, rng.choice(WHERE.get(s.refrigerant, WHERE[s.form])),
                         rng.randint(0, 4), log.topup(day + timedelta(4)),
                         weigh=bool(s.cylinder) and rng.random() < 0.6,
                         follow_in=rng.randint(6, 9) if log.us else rng.randint(7, 24))
            else:
                log.check(day)
            n += 1
            every = s.every_after[1] if s.every_after and day >= s.every_after[0] else s.every
            slack = timedelta(s.late[1] if s.late and s.late[0] == n
                              else -rng.randint(0, 3 if every == 1 else 12))
            day = add_months(day, every) + slack
    if s.detection:
        day = begin + timedelta(rng.randint(45, 90))
        while (day := workday(day)) <= END:
            log.ev("detection-check", day, note="alarm test with reference gas; sensors OK")
            day = add_months(day, 12) - timedelta(rng.randint(0, 14))
    for year in (2024, 2025, 2026):
        for _ in range(s.vents):
            day = workday(date(year, 1, 5) + timedelta(rng.randint(0, 260)))
            mass = log.topup(day)
            if quiet(day) and mass:
                log.add(day, mass, note="top-up after a pressure-relief valve lift")


# ---- special cases, one function per system ------------------------------------------------

def rack1_lej(log: Log) -> None:  # a follow-up check that fails, then a second repair
    w = "MT liquid line filter-drier flange"
    log.check(D("2024-09-10"), w)
    log.ev("repair", D("2024-09-12"), where=w, note="flange gasket renewed")
    log.add(D("2024-09-12"), q("9.4 kg"), weigh=True)
    log.ev("follow-up", D("2024-09-26"), result="fail", where=w, note="bubbles at the same flange")
    log.ev("repair", D("2024-09-27"), where=w, note="filter-drier replaced, flange faces dressed")
    log.add(D("2024-09-27"), q("2.1 kg"), weigh=True)
    log.ev("follow-up", D("2024-10-14"), result="pass")


def dairy_lej(log: Log) -> None:  # repaired in November 2026, follow-up not yet done
    log.leak(D("2026-11-03"), "Schrader valve core, liquid receiver", 2, q("1.6 kg"),
             follow_in=None, fix="valve core replaced, sealed cap fitted; follow-up booked")


def freezer_lej(log: Log) -> None:  # R-404A retrofitted to R-449A
    log.leak(D("2024-06-11"), "condenser coil return bend", 1, q("1.4 kg"), reclaimed="yes",
             note="reclaimed R-404A: virgin high-GWP gas may not be used to service this unit")
    log.ev("recover", D("2025-03-17"), mass=q("10.85 kg"), cylinder="LEJ-R-01", _weigh=True,
           destination="reclaim", note="whole charge recovered for the retrofit")
    log.ev("retrofit", D("2025-03-18"), refrigerant="R-449A", charge="11.5 kg",
           note="expansion valve reset, filter-drier changed, labels replaced")
    log.add(D("2025-03-18"), q("11.5 kg"), weigh=True, cylinder="LEJ-C-02",
            note="initial charge after retrofit")


def nh3_haj(log: Log) -> None:  # ammonia: outside the F-gas rules, kept in the same ledger
    log.leak(D("2025-01-14"), "valve stem gland, HP receiver isolation valve", 0, q("38 kg"),
             follow_in=7, fix="gland repacked", note="ammonia delivered by tanker")


def rack_lt_brs(log: Log) -> None:  # part of the rack removed; a lapsed certificate
    log.ev("recover", D("2024-06-18"), mass=q("24.5 kg"), destination="reuse",
           note="two freezer islands removed in the store refit; gas kept for our own systems")
    log.ev("charge-revised", D("2024-06-18"), charge="140 kg", note="islands removed")
    log.check(D("2026-02-11"), tech="Owen Pryce", note="certificate renewal pending at the visit")


def cu22_brs(log: Log) -> None:  # HCFC: repaired within 14 days, no top-up allowed
    log.leak(D("2024-10-08"), "condenser coil, tube rubbing on bracket", 7,
             fix="tube section replaced, bracket padded; no top-up (HCFC may not be used "
                 "to service equipment)")


def acold_brs(log: Log) -> None:
    log.ev("retire", D("2025-05-20"), mass=q("11.6 kg"), cylinder="BRS-R-01", _weigh=True,
           destination="reclaim", note="replaced by AC-NEW")


def rack22_hou(log: Log) -> None:  # ozone-depleting, >= 50 lb: reclaimed R-22 top-ups
    for on, where, mass in (("2024-05-07", "compressor 2 discharge valve packing", "6 lb 8 oz"),
                            ("2025-07-22", "oil equalizer line flare", "8 lb 12 oz"),
                            ("2026-08-18", "receiver sight glass", "7 lb 4 oz")):
        log.leak(D(on), where, 1, q(mass), True, 7, cylinder="HOU-C-01", reclaimed="yes")


def rackmt_hou(log: Log) -> None:
    log.ev("recover", D("2025-01-22"), mass=q("18 lb"), destination="returned",
           note="receiver overfilled after winter; excess returned to the supplier")


def rackmt_hou_late(log: Log) -> None:  # leak rate over 20 % in November 2026, not verified yet
    log.check(D("2026-10-14"), note="leak search after low receiver level: nothing found")
    log.add(D("2026-10-14"), q("12 lb"), weigh=True, note="low receiver level")
    w = "case 7 evaporator coil, pinholes at the return bends"
    log.add(D("2026-11-10"), q("18 lb"), weigh=True, note="low receiver level")
    log.check(D("2026-11-10"), w, note="leak rate over 20 % (annualizing)")
    log.ev("repair", D("2026-11-20"), where=w,
           note="case 7 coil replaced; verification tests booked")


def rtu2_hou(log: Log) -> None:  # comfort cooling losing its charge: > 125 % added in 2025
    log.leak(D("2025-03-11"), "liquid line service valve core", 0, q("7 lb"), True, 7,
             cylinder="HOU-C-03")
    log.leak(D("2025-05-20"), "evaporator coil return bend", 2, q("8 lb 8 oz"), follow_in=7)
    log.leak(D("2025-07-15"), "evaporator coil return bend", 2, q("9 lb"), True, 7,
             cylinder="HOU-C-03")
    w = "evaporator coil, several pinholes (corrosion)"
    log.check(D("2025-09-09"), w)
    log.add(D("2025-09-09"), q("9 lb 8 oz"), note="charge restored to keep the store cool")
    log.ev("repair", D("2025-10-02"), where=w, note="evaporator coil replaced; unit pumped down")
    log.add(D("2025-10-02"), q("3 lb"), note="trim to full charge")
    log.follow(D("2025-10-09"), D("2025-10-02"))


def rackb_dal(log: Log) -> None:  # rolling-average leak rate passes 20 % on 2026-06-09
    log.ev("charge-revised", D("2024-02-20"), charge="620 lb",
           note="full charge recalculated from pipe runs and case volumes")
    for on, where, mass in (("2024-06-11", "case 22 TXV flare", "18 lb"),
                            ("2024-11-19", "LT suction header brazed joint", "14 lb"),
                            ("2025-04-15", "cold room 2 evaporator return bend", "16 lb"),
                            ("2025-09-23", "liquid line filter-drier flange", "20 lb")):
        log.leak(D(on), where, 2, q(mass), True, 7)
    for on, mass in (("2026-01-27", "24 lb"), ("2026-03-17", "32 lb"), ("2026-05-05", "36 lb")):
        log.check(D(on), note="leak search after low receiver level: nothing found")
        log.add(D(on), q(mass), note="low receiver level")
    w = "MT suction line, pinhole at pipe clamp, aisle 6 ceiling"
    log.add(D("2026-06-09"), q("44 lb"), note="low receiver level")
    log.check(D("2026-06-09"), w, note="leak rate over 20 % (rolling average)")
    log.ev("repair", D("2026-06-16"), where=w, note="pipe section replaced, clamps lined")
    log.follow(D("2026-06-24"), D("2026-06-16"))


def rack1_sac(log: Log) -> None:  # California: repairs within 14 days; detection added 2026
    log.leak(D("2024-08-13"), "LT liquid manifold, cracked brazed joint", 10, q("64 lb"),
             True, 7)
    log.ev("recover", D("2025-05-15"), mass=q("9 lb"), cylinder="SAC-R-01", _weigh=True,
           destination="reclaim", note="case line-up 9 isolated and recovered before coil change")
    log.leak(D("2025-05-06"), "case line-up 9 evaporator coil", 9, q("48 lb"), follow_in=7)
    log.leak(D("2026-01-20"), "compressor 4 suction service valve", 5, q("26 lb"), True, 7)
    log.ev("detection-on", D("2026-03-24"), note="automatic leak detection, 12 sampling points")
    log.ev("detection-check", D("2026-03-24"), note="commissioning test")
    log.check(D("2026-11-19"), "rooftop condenser header, corrosion pinhole",
              note="repair booked; parts on order")


SPECIAL = {("DE-LEJ", "RACK-1"): rack1_lej, ("DE-LEJ", "CU-DAIRY"): dairy_lej,
           ("DE-LEJ", "CU-FREEZER"): freezer_lej,
           ("DE-HAJ", "NH3-PLANT"): nh3_haj, ("GB-BRS", "RACK-LT"): rack_lt_brs,
           ("GB-BRS", "CU-22"): cu22_brs, ("GB-BRS", "AC-OLD"): acold_brs,
           ("TX-HOU", "RACK-22"): rack22_hou, ("TX-HOU", "RACK-MT"): rackmt_hou,
           ("TX-HOU", "RTU-2"): rtu2_hou, ("TX-DAL", "RACK-B"): rackb_dal,
           ("CA-SAC", "RACK-1"): rack1_sac}
# Cases added to the scenario later: written after the routine, from their own random stream,
# so that the routine events of every system stay as they were.
LATE = {("TX-HOU", "RACK-MT"): rackmt_hou_late}

# order of events on the same day
ORDER = ["check", "recover", "retrofit", "charge-revised", "repair", "add", "follow-up",
         "detection-on", "detection-check", "retire"]


def weigh(rows: list[dict]) -> None:
    """Give `_weigh` rows cylinder weights before/after, following each cylinder's content."""
    tare = {c["id"]: q(c["tare"]) for c in CYLINDERS}
    gross = {c["id"]: q(c["tare"]) + q(c["content"]) for c in CYLINDERS}
    for r in sorted((r for r in rows if r.pop("_weigh", False)), key=lambda r: r["on"]):
        cyl, mass, unit = r["cylinder"], r["mass"], UNIT[r["site"]]
        after = gross[cyl] - mass if r["kind"] == "add" else gross[cyl] + mass
        if not tare[cyl] <= after <= tare[cyl] + CAPACITY[unit]:
            r["cylinder"] = ""  # that cylinder could not have done it: record the mass only
            continue
        r.update(before=fmt(gross[cyl], unit), after=fmt(after, unit), mass="")
        gross[cyl] = after


def write(name: str, rows: list[dict]) -> None:
    with (OUT / f"{name}.csv").open("w", encoding="utf-8", newline="") as f:
        out = csv.DictWriter(f, list(rows[0]), restval="", lineterminator="\n")
        out.writeheader()
        out.writerows(rows)


def main() -> None:
    rng = random.Random(20231201)
    events: list[dict] = []
    for s in SYSTEMS:
        log = Log(s, random.Random(s.seed) if s.seed else rng)
        if (s.site, s.tag) in SPECIAL:
            SPECIAL[s.site, s.tag](log)
        routine(log)
        if (s.site, s.tag) in LATE:
            LATE[s.site, s.tag](log.aside(f"{s.site}/{s.tag}"))
        events += log.rows
    weigh(events)
    seq = {id(r): i for i, r in enumerate(events)}
    events.sort(key=lambda r: (r["site"], r["tag"], r["on"], ORDER.index(r["kind"]), seq[id(r)]))
    cols = ["site", "tag", "kind", "on", "mass", "cylinder", "before", "after", "refrigerant",
            "charge", "result", "where", "method", "destination", "reclaimed", "tech", "by", "note"]
    for r in events:
        r["on"] = r["on"].isoformat()
        if isinstance(r.get("mass"), int):
            r["mass"] = fmt(r["mass"], UNIT[r["site"]])
    yes = {True: "yes", False: "no"}
    company = {t: c for c, (techs, _) in COMPANIES.items() for t in techs}
    OUT.mkdir(exist_ok=True)
    write("sites", [dict(code=s["code"], name=s["name"], country=s["country"],
                         subdivision=s["subdiv"], timezone=s["timezone"], regimes="",
                         leak_rate_method=s["method"], unit=s["unit"]) for s in SITES])
    write("technicians", [{"name": t["name"], "company": company[t["name"]], **t, "issuer": ISSUER[company[t["name"]]]}
                          for t in TECHS])
    write("companies", COMPANY_CERTIFICATES)
    write("cylinders", [dict(id=c["id"], refrigerant=c["refrigerant"], kind=c["kind"],
                             tare=c["tare"]) for c in CYLINDERS])
    write("systems", [dict(
        site=s.site, tag=s.tag, refrigerant=s.refrigerant, charge=s.charge,
        application=s.application, in_service=s.in_service, form=s.form,
        description=s.description, hermetic=yes[s.hermetic], residential="no",
        detection_system=yes[s.detection], location=s.location, maker="", model="", serial="",
        defrost_every_hours=s.defrost or "", tech=s.tech) for s in SYSTEMS])
    write("events", [{c: r.get(c, "") for c in cols} for r in events])
    print(f"wrote {len(events)} events for {len(SYSTEMS)} systems to {OUT}")


if __name__ == "__main__":
    main()
