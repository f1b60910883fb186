"""Report data (the dicts of ``ledger.services.reporting``) as tables: DataFrames plus columns.

Every table is a ``Sheet``: a name, the ``Column`` specs (key, header with unit, kind, total)
and a DataFrame of ``object`` dtype keyed by column key, so values stay exactly as the service
made them (``Decimal``, ``date``, ``str``); the writers format them. The spreadsheet, the PDF
and the JSON output all read the same values, so they agree cell for cell.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import pandas as pd

from ledger.exports.common import (
    BOOL,
    DATE,
    DATETIME,
    INT,
    KG,
    NUMBER,
    PERCENT,
    TEXT,
    TONNES,
    Column,
    gwp_text,
    share_text,
)


@dataclass(frozen=True)
class Sheet:
    """One table of a report."""

    name: str
    columns: tuple[Column, ...]
    frame: pd.DataFrame
    totals: bool = False  # add a totals row (formulas in spreadsheets)
    mark: str | None = None  # key of a boolean column marking rows to highlight (not shown)
    dim: str | None = None  # key of a boolean column marking rows to grey out (not shown)
    title: str = ""

    @property
    def headers(self) -> list[str]:
        return [c.header for c in self.columns]


def frame(rows: Sequence[Mapping[str, Any]], columns: Sequence[Column], extra: Sequence[str] = ()) -> pd.DataFrame:
    """A DataFrame of the given columns (plus hidden ``extra`` keys), object dtype, row order kept."""
    keys = [c.key for c in columns] + [k for k in extra if k not in {c.key for c in columns}]
    data = [[row.get(k) for k in keys] for row in rows]
    return pd.DataFrame(data, columns=keys, dtype=object)


# --- annual summary ---------------------------------------------------------------------------

def _destinations(summary: Mapping[str, Any]) -> list[str]:
    found: set[str] = set()
    for group in ("systems", "sites", "refrigerants"):
        for row in summary[group]:
            found.update(row["recovered_to"])
    return sorted(found)


def _flatten(rows: Sequence[Mapping[str, Any]], destinations: Sequence[str]) -> list[dict[str, Any]]:
    flat = []
    for row in rows:
        item = dict(row)
        for d in destinations:
            item[f"recovered_to_{d}_kg"] = row["recovered_to"].get(d)
        if "refrigerants" in row:
            item["refrigerants"] = " -> ".join(row["refrigerants"])
        if "regimes" in row:
            item["regimes"] = " ".join(row["regimes"])
        flat.append(item)
    return flat


def _mass_columns(destinations: Sequence[str]) -> list[Column]:
    return [
        Column("full_charge_start_kg", "full charge 1 Jan (kg)", KG, "sum"),
        Column("full_charge_end_kg", "full charge 31 Dec (kg)", KG, "sum"),
        Column("full_charge_kg", "full charge for rate (kg)", KG, "sum"),
        Column("added_kg", "added (kg)", KG, "sum"),
        Column("initial_fill_kg", "of which initial charge (kg)", KG, "sum"),
        Column("service_added_kg", "added excl. initial charge (kg)", KG, "sum"),
        Column("recovered_kg", "recovered (kg)", KG, "sum"),
        *[Column(f"recovered_to_{d}_kg", f"recovered to {d} (kg)", KG, "sum") for d in destinations],
        Column("net_loss_kg", "net loss, material balance (kg)", KG, "sum"),
        Column("leak_rate_percent", "leak rate (% of full charge)", PERCENT,
               ("ratio", "service_added_kg", "full_charge_kg", 100)),
        Column("co2e_t", "CO2e of additions (t)", TONNES, "sum"),
    ]


def _check_columns() -> list[Column]:
    return [
        Column("checks_required", "leak checks required", INT, "sum"),
        Column("checks_done", "leak checks done", INT, "sum"),
        Column("checks_missed", "leak checks missed", INT, "sum"),
        Column("overdue", "obligations overdue", INT, "sum"),
    ]


def annual_sheets(summary: Mapping[str, Any]) -> list[Sheet]:
    """The tables of the annual loss summary: systems, sites, refrigerants, estate, scope 1,
    scope 1 detail, obligations, months and years."""
    dest = _destinations(summary)
    masses = _mass_columns(dest)
    chronic = share_text(summary["chronic_percent"])  # "125 %": the regimes' indicator share
    systems_cols = (
        Column("site", "site", TEXT),
        Column("system", "system", TEXT),
        Column("description", "description", TEXT, width=28),
        Column("application", "application", TEXT),
        Column("refrigerants", "refrigerant", TEXT),
        Column("gwp", f"GWP ({summary['basis']})", NUMBER),
        *masses,
        Column("chronic", f"{chronic} or more added", BOOL),
        *_check_columns(),
        Column("placed_in_service_on", "placed in service", DATE),
        Column("retired_on", "retired", DATE),
    )
    sites_cols = (
        Column("site", "site", TEXT),
        Column("name", "name", TEXT, width=28),
        Column("country", "country", TEXT),
        Column("regimes", "regimes", TEXT),
        Column("systems", "systems", INT, "sum"),
        *masses,
        Column("chronic", f"systems with {chronic} or more added", INT, "sum"),
        *_check_columns(),
    )
    refrigerant_cols = (
        Column("refrigerant", "refrigerant", TEXT),
        Column("gwp", f"GWP ({summary['basis']})", NUMBER),
        Column("systems", "systems", INT, "sum"),
        *masses,
    )
    estate = summary["estate"]
    estate_rows = [
        {"figure": "systems", "value": estate["systems"], "unit": ""},
        {"figure": "sites", "value": estate["sites"], "unit": ""},
        {"figure": "full charge 1 Jan", "value": estate["full_charge_start_kg"], "unit": "kg"},
        {"figure": "full charge 31 Dec", "value": estate["full_charge_end_kg"], "unit": "kg"},
        {"figure": "full charge for rate", "value": estate["full_charge_kg"], "unit": "kg"},
        {"figure": "added", "value": estate["added_kg"], "unit": "kg"},
        {"figure": "of which initial charge", "value": estate["initial_fill_kg"], "unit": "kg"},
        {"figure": "added excl. initial charge", "value": estate["service_added_kg"], "unit": "kg"},
        {"figure": "recovered", "value": estate["recovered_kg"], "unit": "kg"},
        *[{"figure": f"recovered to {d}", "value": estate["recovered_to"].get(d), "unit": "kg"}
          for d in dest],
        {"figure": "net loss, material balance", "value": estate["net_loss_kg"], "unit": "kg"},
        {"figure": "leak rate", "value": estate["leak_rate_percent"], "unit": "% of full charge"},
        {"figure": f"CO2e of additions ({summary['basis']})", "value": estate["co2e_t"], "unit": "t"},
        {"figure": f"systems with {chronic} or more added", "value": estate["chronic"], "unit": ""},
        {"figure": "leak checks required", "value": estate["checks_required"], "unit": ""},
        {"figure": "leak checks done", "value": estate["checks_done"], "unit": ""},
        {"figure": "leak checks missed", "value": estate["checks_missed"], "unit": ""},
        {"figure": "obligations overdue", "value": estate["overdue"], "unit": ""},
        {"figure": "obligations met late", "value": estate["met_late"], "unit": ""},
    ]
    estate_cols = (
        Column("figure", "figure", TEXT, width=34),
        Column("value", "value", NUMBER),
        Column("unit", "unit", TEXT, width=18),
    )
    method_rows = []
    detail_rows = []
    input_names: list[str] = []
    for m in summary["scope1"]:
        method_rows.append({
            "method": m["label"],
            "formula": m["formula"],
            "inputs": "; ".join(f"{k.removesuffix('_kg')} {v:.3f} kg" for k, v in m["inputs"].items()),
            "emissions_kg": m["emissions_kg"],
            "co2e_t": m["co2e_t"],
            "source": m["source"],
            "assumptions": "; ".join(m["assumptions"]),
        })
        for part in m["by_refrigerant"]:
            for name in part["inputs"]:
                if name not in input_names:
                    input_names.append(name)
            detail_rows.append({
                "method": m["label"], "refrigerant": part["refrigerant"],
                "category": part["category"], **part["inputs"],
                "emissions_kg": part["emissions_kg"], "gwp": part["gwp"], "co2e_t": part["co2e_t"],
            })
    method_cols = (
        Column("method", "method", TEXT, width=26),
        Column("formula", "formula", TEXT, width=40),
        Column("inputs", "inputs", TEXT, width=48),
        Column("emissions_kg", "emissions (kg)", KG),
        Column("co2e_t", f"CO2e ({summary['basis']}) (t)", TONNES),
        Column("source", "source", TEXT, width=48),
        Column("assumptions", "assumptions", TEXT, width=60),
    )
    detail_cols = (
        Column("method", "method", TEXT, width=26),
        Column("refrigerant", "refrigerant", TEXT),
        Column("category", "equipment row (Table 7.9)", TEXT),
        *[Column(n, INPUT_HEADERS.get(n, n), KG) for n in input_names],
        Column("emissions_kg", "emissions (kg)", KG),
        Column("gwp", f"GWP ({summary['basis']})", NUMBER),
        Column("co2e_t", "CO2e (t)", TONNES),
    )
    obligations = obligation_sheet(summary["obligations"], "obligations")
    monthly_cols = (
        Column("month", "month", TEXT),
        Column("added_kg", "added excl. initial charge (kg)", KG, "sum"),
        Column("co2e_t", "CO2e (t)", TONNES, "sum"),
    )
    trend_cols = (
        Column("year", "year", INT),
        Column("added_kg", "added excl. initial charge (kg)", KG),
        Column("co2e_t", f"CO2e ({summary['basis']}) (t)", TONNES),
    )
    return [
        Sheet("systems", systems_cols, frame(_flatten(summary["systems"], dest), systems_cols, ["chronic"]),
              totals=True, mark="chronic", title="Systems"),
        Sheet("sites", sites_cols, frame(_flatten(summary["sites"], dest), sites_cols), totals=True,
              title="Sites"),
        Sheet("refrigerants", refrigerant_cols, frame(_flatten(summary["refrigerants"], dest),
              refrigerant_cols), totals=True, title="Refrigerants"),
        Sheet("estate", estate_cols, frame(estate_rows, estate_cols), title="Estate"),
        Sheet("scope 1", method_cols, frame(method_rows, method_cols), title="Scope 1 estimates"),
        Sheet("scope 1 detail", detail_cols, frame(detail_rows, detail_cols),
              title="Scope 1 estimates by refrigerant"),
        obligations,
        Sheet("months", monthly_cols, frame(summary["monthly"], monthly_cols), totals=True,
              title="Additions by month"),
        Sheet("years", trend_cols, frame(summary["trend"], trend_cols), title="Additions by year"),
    ]


INPUT_HEADERS = {
    "inventory_change_kg": "inventory change (kg)",
    "acquired_kg": "acquired (kg)",
    "disbursed_kg": "disbursed (kg)",
    "charge_start_kg": "full charge start (kg)",
    "charge_end_kg": "full charge end (kg)",
    "pn_kg": "PN bought for new units (kg)",
    "cn_kg": "CN full charge of new units (kg)",
    "ps_kg": "PS bought for servicing (kg)",
    "cd_kg": "CD full charge of retired units (kg)",
    "rd_kg": "RD recovered from retired units (kg)",
    "c_t_kg": "C x T operating charge x share of year (kg)",
}


def obligation_sheet(rows: Sequence[Mapping[str, Any]], name: str) -> Sheet:
    """Obligations with their state (met, met late, missed, open); missed rows are marked."""
    cols = (
        Column("due_on", "due", DATE),
        Column("site", "site", TEXT),
        Column("system", "system", TEXT),
        Column("kind", "kind", TEXT, width=20),
        Column("regime", "regime", TEXT),
        Column("state", "state", TEXT),
        Column("met_on", "met on", DATE),
        Column("met_by", "met by event", INT),
        Column("earliest_on", "earliest", DATE),
        Column("basis", "basis", TEXT, width=36),
        Column("detail", "detail", TEXT, width=48),
    )
    flat = [{**r, "system": r.get("system") or "(facility)",
             "missed": r.get("status") == "overdue"} for r in rows]
    return Sheet(name, cols, frame(flat, cols, ["missed"]), mark="missed", title="Obligations")


# --- logbook ------------------------------------------------------------------------------

EVENT_COLUMNS: tuple[Column, ...] = (
    Column("on", "date", DATE),
    Column("id", "event", INT),
    Column("kind_label", "kind", TEXT, width=22),
    Column("refrigerant", "refrigerant", TEXT),
    Column("mass_kg", "quantity (kg)", KG),
    Column("charge_kg", "full charge (kg)", KG),
    Column("added_for", "added for", TEXT),
    Column("cylinder", "cylinder", TEXT),
    Column("cylinder_kind", "cylinder kind", TEXT),
    Column("cylinder_before_kg", "cylinder before (kg)", KG),
    Column("cylinder_after_kg", "cylinder after (kg)", KG),
    Column("reclaimed", "recycled or reclaimed gas", BOOL),
    Column("facility", "recycling/reclamation/destruction facility", TEXT, width=30),
    Column("facility_certificate", "facility certificate", TEXT),
    Column("result", "result", TEXT),
    Column("location", "location", TEXT, width=24),
    Column("method", "check method", TEXT),
    Column("destination", "recovered gas to", TEXT),
    Column("technician", "technician", TEXT, width=20),
    Column("company", "company", TEXT, width=24),
    Column("company_certificate", "company certificate", TEXT, width=22),
    Column("certificate", "certificate (scheme, number)", TEXT, width=30),
    Column("uncertified", "certificate warning", TEXT, width=36),
    Column("recorded_by", "recorded by", TEXT),
    Column("recorded_at", "recorded at (UTC)", DATETIME, width=20),
    Column("note", "note", TEXT, width=40),
    Column("void_text", "voided", TEXT, width=36),
    Column("attachments", "attachments (SHA-256)", TEXT, width=30),
    Column("chain_hash", "chain hash", TEXT, width=30),
)


def void_text(row: Mapping[str, Any]) -> str:
    """The correction note beside an event: who voided it and why, or what a void voids."""
    if row.get("voided"):
        return f"VOIDED by event {row['voided_by']}: {row['void_reason'] or ''}".strip()
    if row.get("voids") is not None:
        return f"voids event {row['voids']}: {row.get('reason') or ''}".strip()
    return ""


_MASS_KEYS = ("mass_kg", "charge_kg", "cylinder_before_kg", "cylinder_after_kg")


def event_columns(unit: str) -> tuple[Column, ...]:
    """The logbook's event columns; a site shown in pounds gets a pound column beside each kg one."""
    if unit != "lb":
        return EVENT_COLUMNS
    out: list[Column] = []
    for c in EVENT_COLUMNS:
        out.append(c)
        if c.key in _MASS_KEYS:
            out.append(Column(c.key.removesuffix("_kg") + "_lb", c.header.replace("(kg)", "(lb)"), KG))
    return tuple(out)


def logbook_sheets(book: Mapping[str, Any]) -> list[Sheet]:
    """The tables of a system logbook: system facts, events, obligations, leak rates (US)."""
    from ledger.exports.common import in_unit

    facts = logbook_facts(book)
    fact_cols = (Column("item", "item", TEXT, width=30), Column("value", "value", TEXT, width=70))
    unit = book["site"].get("mass_unit") or "kg"
    columns = event_columns(unit)
    events = [
        {**e, "void_text": void_text(e), "attachments": " ".join(e["attachments"]),
         "dim": e["voided"],
         **{k.removesuffix("_kg") + "_lb": in_unit(e[k], "lb") for k in _MASS_KEYS}}
        for e in book["events"]
    ]
    sheets = [
        Sheet("system", fact_cols, frame(facts, fact_cols), title="System"),
        Sheet("events", columns, frame(events, columns, ["dim"]), dim="dim",
              title="Events"),
        obligation_sheet(book["obligations"], "obligations"),
    ]
    if book.get("findings"):
        finding_cols = (
            Column("severity", "severity", TEXT, width=10),
            Column("source", "source", TEXT, width=30),
            Column("message", "finding", TEXT, width=90),
        )
        sheets.append(Sheet("findings", finding_cols, frame(book["findings"], finding_cols),
                            title="Findings: detector evidence and rule notes"))
    if book["leak_rates"]:
        rate_cols = (
            Column("on", "added on", DATE),
            Column("event_id", "event", INT),
            Column("added_kg", "added (kg)", KG),
            Column("full_charge_kg", "full charge (kg)", KG),
            Column("annualizing_percent", "annualizing (%)", PERCENT),
            Column("rolling_percent", "rolling average (%)", PERCENT),
            Column("method", "method used", TEXT),
            Column("threshold_percent", "threshold (%)", PERCENT),
            Column("exceeded", "exceeded", BOOL),
            Column("counted", "counted", BOOL),
            Column("note", "note", TEXT, width=40),
        )
        rates = [{**r, "over": r["exceeded"]} for r in book["leak_rates"]]
        sheets.append(Sheet("leak rates", rate_cols, frame(rates, rate_cols, ["over"]), mark="over",
                            title="Leak rate at each addition (US)"))
    return sheets


def logbook_facts(book: Mapping[str, Any]) -> list[dict[str, Any]]:
    """The header of a logbook as (item, value) rows."""
    from ledger.exports.common import fmt

    site, system = book["site"], book["system"]
    composition = " / ".join(
        f"{c['component']} {fmt(c['mass_percent'], NUMBER, 1)} %" for c in book["composition"]
    )
    charge = f"{fmt(book['full_charge_kg'], KG)} kg"
    if book.get("full_charge_lb") is not None:
        charge += f" ({fmt(book['full_charge_lb'], KG, 2)} lb)"
    co2e = ""
    if book["co2e_t"] is not None:
        co2e = (f"{fmt(book['co2e_t'], TONNES)} t (GWP {gwp_text(book['gwp'])}, "
                f"basis {book['gwp_basis']})")
        if book.get("gwp_note"):
            co2e += f"; {book['gwp_note']}"
    rows = [
        ("site", f"{site['code']}  {site['name']} ({site['country']})"),
        ("system", f"{system['tag']}  {system['description']}".strip()),
        ("application", f"{system['application']}, {system['equipment_form']}"),
        ("location", system["location"]),
        ("maker / model / serial", " / ".join(x for x in (system["maker"], system["model"],
                                                            system["serial"]) if x)),
        ("refrigerant", book["refrigerant"] or ""),
        ("composition (mass %)", composition),
        ("safety class", book["safety_class"] or ""),
        ("full charge", charge),
        ("CO2e of the full charge", co2e),
        ("detection system", "yes" if book["detection_system"] else "no"),
        ("hermetically sealed", "yes" if system["hermetic"] else "no"),
        ("in service", ("yes, since " + fmt(book["in_service_on"], DATE)) if book["in_service"]
         else f"no (retired {fmt(book['retired_on'], DATE)})"),
    ]
    for t in book["tiers"]:
        interval = (f"leak check every {t['interval_months']} months" if t["interval_months"]
                    else "no periodic leak check")
        reason = f"; {t['reason']}" if t["reason"] else ""
        rows.append((f"tier ({t['regime']})", f"{t['band']}, {interval} [{t['basis']}]{reason}"))
    for c in book.get("companies", ()):
        until = fmt(c["valid_to"], DATE) if c["valid_to"] else "open"
        rows.append((f"company certificate ({c['company']})",
                     f"{c['scope']} {c['certificate']}" + (f", {c['issuer']}" if c["issuer"] else "")
                     + f", valid {fmt(c['valid_from'], DATE) or '?'} to {until}"))
    uncertified = sum(1 for e in book["events"] if e.get("uncertified"))
    if uncertified:
        rows.append(("work without a valid certificate",
                     f"{uncertified} event(s): done by an uncertified person; they meet no check duty"))
    rows += [
        ("period", f"{fmt(book['period']['from'], DATE)} to {fmt(book['period']['to'], DATE)}"),
        ("chain head", book["chain_head"] or ""),
        ("generated", fmt(book["generated_at"], DATETIME)),
        ("tool version", f"refledger {book['version']}"),
    ]
    return [{"item": k, "value": v} for k, v in rows]


# --- due list -------------------------------------------------------------------------------

DUE_COLUMNS: tuple[Column, ...] = (
    Column("due_on", "due", DATE),
    Column("status", "status", TEXT),
    Column("days_overdue", "days overdue", INT),
    Column("site", "site", TEXT),
    Column("system", "system", TEXT),
    Column("kind", "kind", TEXT, width=22),
    Column("earliest_on", "earliest", DATE),
    Column("regime", "regime", TEXT),
    Column("basis", "basis", TEXT, width=40),
    Column("detail", "detail", TEXT, width=50),
)


def due_sheet(rows: Sequence[Mapping[str, Any]], as_of: Any) -> Sheet:
    """The due list (rows of ``services.obligations.due``) with days overdue as of a day."""
    flat = []
    for r in rows:
        overdue = r.get("status") == "overdue"
        days = (as_of - r["due_on"]).days if overdue and as_of is not None else None
        flat.append({**r, "system": r.get("system") or "(facility)", "days_overdue": days,
                     "overdue": overdue})
    return Sheet("due", DUE_COLUMNS, frame(flat, DUE_COLUMNS, ["overdue"]), mark="overdue",
                 title="Obligations due")
