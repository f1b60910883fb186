"""Kept results: a cache of per-site results that wraps the pipeline, never woven into it.

Two results are kept per site, each only as a cache that may be dropped at any time:

* what `due` showed (`kept_site`, `kept_obligation`, `kept_finding`): `due_by_site`;
* one site's part of an annual summary (`kept_annual`): `annual_parts`.

Each wrapper is given the pipeline step as a function, ``fresh(conn, site_ids, ...)``, that
computes the result of the sites it is given from their records (it knows nothing of this
cache). The wrapper reads what is kept, decides per site whether it can be reused, calls
``fresh`` for the others inside the same read transaction, and keeps what it returned for
next time. Names: *kept* is what is stored, *heads* the digest of a site's inputs (site row,
system rows and chain heads) it was computed from, *fresh* what was just computed.

A kept `due` row set is reused when all of these hold:

* the site's revision is the one kept (triggers raise it with every event, void, system,
  filing or detector episode added to the site; see tables.site_revision);
* the rules and reference data are those of `rules_key()`;
* the day asked for is on or after the day they were computed for, in the same calendar
  year, with no regime date in between, and not after the earliest due day of a duty that
  was open then (``fresh_until``): until then no status and no wording can change;
* no event of the site was dated after the day they were computed for (such sites are not
  kept);
* the site's heads are those kept (`site_heads`): an event added or removed behind the
  triggers' back, or a system fact changed in place, makes the rows stale;
* the kept rows still match the digest kept with them (`kept_content`): a kept row removed
  or altered makes the site computed again, never silently absent.

Under those conditions the rows shown are the same (tests/services/test_kept.py holds the
two paths to that): nothing new happened, nothing open fell due, a periodic series' first
unmet period stays the first and later periods collapse into it. A kept annual part is reused
for the same year, basis and as-of day under the revision, rules, heads and content checks.

The wrappers write kept rows in a transaction of their own and never wait for one
(`keep_if_free`): a read-only or busy ledger computes again next time.
"""

from __future__ import annotations

import functools
import hashlib
import io
import pickle
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, fields
from datetime import UTC, date, datetime
from typing import Any, Protocol, TypeVar

from ledger.domain.records import (
    Basis,
    Confidence,
    Finding,
    Obligation,
    ObligationKind,
    ObligationStatus,
    Severity,
)
from ledger.store import repository as repo
from ledger.store.db import Database

KEEP_FORMAT = "3"  # bump when what is kept, or how it is read back, changes

# The code kept results depend on: a change to any of these files makes every kept row stale,
# so nobody has to remember to bump a version for a kept row to follow a rule change.
_KEPT_SOURCES = ("domain", "rules", "reference", "units.py", "services/obligations.py", "services/reporting.py",
                 "services/kept.py")


@functools.cache
def rules_key() -> str:
    """A digest of everything besides the records that the kept rows depend on: the format of
    what is kept, the tool version, and the source of the rules, the domain records, the
    reference data (CSV files included), the two services whose results are kept and this
    module."""
    from pathlib import Path

    from ledger import __version__

    root = Path(__file__).resolve().parents[1]
    digest = hashlib.sha256(f"{KEEP_FORMAT}|{__version__}".encode())
    for name in _KEPT_SOURCES:
        path = root / name
        files = sorted(p for p in path.rglob("*") if p.suffix in (".py", ".csv")) if path.is_dir() else [path]
        for f in files:
            digest.update(f.relative_to(root).as_posix().encode() + b"\0" + f.read_bytes() + b"\0")
    return digest.hexdigest()


@functools.cache
def rule_dates() -> tuple[date, ...]:
    """Every date a regime names (dates of application, phase-ins): the rules may change there."""
    from ledger.rules import REGIMES

    return tuple(sorted({c.value for m in REGIMES.values() for c in m.CONSTANTS if isinstance(c.value, date)}))


def keep_if_free(db: Database, write: Callable[[Any], None]) -> None:
    """Run a write of kept results in its own transaction, unless the ledger cannot take it
    now: a read-only file or role, or another writer holding it just now. Kept results are
    never waited for; they are computed again next time."""
    from sqlalchemy.exc import OperationalError, ProgrammingError

    try:
        with db.write(wait=False) as conn:
            write(conn)
    except (OperationalError, ProgrammingError):
        return


# --- digests ----------------------------------------------------------------------------------

_KEPT_SITE_FIELDS = ("as_of", "fresh_until", "rules_key", "revision", "inputs")
_KEPT_ROW_SKIP = frozenset({"id"})


def _canon(values: Any) -> str:
    """A stable text of plain values (dicts by sorted key); both sides of every comparison are
    built from the same column types, so ``repr`` of dates and numbers is stable enough and
    several times cheaper than JSON here."""
    if isinstance(values, dict):
        return repr(sorted(values.items()))
    return repr([sorted(v.items()) if isinstance(v, dict) else v for v in values])


def _row_dict(row: Any) -> dict[str, Any]:
    mapping = row if isinstance(row, dict) else row._mapping
    return {k: mapping[k] for k in mapping.keys() if k not in _KEPT_ROW_SKIP}


def kept_content(site_row: Any, obligations: Sequence[Any], findings: Sequence[Any]) -> str:
    """The digest kept with a site's kept `due` rows: its `kept_site` fields and every
    obligation and finding row (in any order). A row removed, added or altered changes it.

    Args:
        site_row: the `kept_site` row or the dict written for it.
        obligations, findings: that site's rows (rows or dicts; ``id`` is ignored).
    """
    get = site_row.get if isinstance(site_row, dict) else lambda k: getattr(site_row, k)
    head = _canon([get(k) for k in _KEPT_SITE_FIELDS])
    rows = sorted(_canon(_row_dict(r)) for r in obligations) + ["|"] + sorted(_canon(_row_dict(r)) for r in findings)
    return hashlib.sha256("\n".join([head, *rows]).encode()).hexdigest()


def site_heads(conn: Any, site_ids: Sequence[int]) -> dict[int, str]:
    """Site id -> a digest of what its kept results were computed from besides the rules: the
    site row, each system row and each system's chain head as they are now (kept in the
    ``inputs`` column)."""
    from sqlalchemy import select

    from ledger.store.tables import site as site_table
    from ledger.store.tables import system as system_table

    ids = sorted(set(site_ids))
    parts: dict[int, list[str]] = {sid: [] for sid in ids}
    systems: list[Any] = []
    for i in range(0, len(ids), 10_000):
        chunk = ids[i : i + 10_000]
        for r in conn.execute(select(site_table).where(site_table.c.id.in_(chunk))).mappings():
            parts[r["id"]].append(_canon(dict(r)))
        systems.extend(conn.execute(select(system_table).where(system_table.c.site_id.in_(chunk))
                                    .order_by(system_table.c.id)).mappings())
    chain_heads = repo.chain_heads([r["id"] for r in systems], conn=conn)
    for r in systems:
        parts[r["site_id"]].append(_canon([dict(r), chain_heads.get(r["id"])]))
    return {sid: hashlib.sha256("\n".join(p).encode()).hexdigest() for sid, p in parts.items()}


_ANNUAL_FIELDS = ("site_id", "year", "basis", "as_of", "rules_key", "revision", "inputs")


def annual_content(row: Any) -> str:
    """The digest kept with a kept annual part: its key, heads and body."""
    get: Callable[[str], Any] = row.get if isinstance(row, dict) else lambda k: getattr(row, k)
    head = "|".join(str(get(k)) for k in _ANNUAL_FIELDS)
    return hashlib.sha256(head.encode() + b"\0" + bytes(get("body"))).hexdigest()


def kept_mismatches(conn: Any) -> list[str]:
    """One sentence per site whose kept `due` rows no longer match the digest kept with them."""
    from sqlalchemy import select

    from ledger.store.tables import kept_finding, kept_obligation, kept_site, site

    codes = dict(conn.execute(select(site.c.id, site.c.code)).all())
    obs: dict[int, list[Any]] = {}
    fins: dict[int, list[Any]] = {}
    for r in conn.execute(select(kept_obligation)):
        obs.setdefault(r.site_id, []).append(r)
    for r in conn.execute(select(kept_finding)):
        fins.setdefault(r.site_id, []).append(r)
    out = []
    for row in conn.execute(select(kept_site).order_by(kept_site.c.site_id)):
        if row.content != kept_content(row, obs.pop(row.site_id, []), fins.pop(row.site_id, [])):
            out.append(f"site {codes.get(row.site_id, row.site_id)}: kept `due` rows were removed or altered "
                       "(`due` computes the site again)")
    for sid in sorted(set(obs) | set(fins)):
        out.append(f"site {codes.get(sid, sid)}: kept `due` rows without their site row (ignored by `due`)")
    return out


def kept_annual_mismatches(conn: Any) -> list[str]:
    """One sentence per kept annual part that no longer matches the digest kept with it."""
    from sqlalchemy import select

    from ledger.store.tables import kept_annual, site

    codes = dict(conn.execute(select(site.c.id, site.c.code)).all())
    return [f"site {codes.get(r.site_id, r.site_id)}: kept annual part {r.year}/{r.basis} was altered "
            "(the summary builds it again)"
            for r in conn.execute(select(kept_annual).order_by(kept_annual.c.site_id, kept_annual.c.year))
            if r.content != annual_content(r)]


# --- kept `due` rows --------------------------------------------------------------------------


@dataclass(slots=True)
class DueRows:
    """What `due` shows of one site (or several, gathered): its unmet current obligations, the
    count of earlier missed periods of each (None for one-off duties) and the rules' findings."""

    obligations: list[Obligation] = field(default_factory=list)
    missed: list[int | None] = field(default_factory=list)
    findings: list[Finding] = field(default_factory=list)


@dataclass(slots=True)
class FreshDue:
    """One site's `due` rows just computed by the pipeline, with the newest day of its records
    (a site with records dated after the day asked for is good for that day only: not kept)."""

    rows: DueRows
    newest_on: date | None


T = TypeVar("T")
FreshDueStep = Callable[[Any, list[int]], tuple[dict[int, FreshDue], T]]


def _usable(kept: Any, revision: int, as_of: date) -> bool:
    return (
        kept is not None
        and kept.rules_key == rules_key()
        and kept.revision == revision
        and kept.as_of <= as_of
        and kept.as_of.year == as_of.year
        and (kept.fresh_until is None or as_of <= kept.fresh_until)
        and not any(kept.as_of < d <= as_of for d in rule_dates())
    )


def _kept_obligation(row: Any, site_code: str, as_of: date, bases: dict[tuple, Basis]) -> Obligation:
    key = (row.citation, row.confidence, row.basis_note)
    basis = bases.get(key)
    if basis is None:
        basis = bases[key] = Basis(row.citation, Confidence(row.confidence), row.basis_note)
    status = ObligationStatus.OVERDUE if row.due_on < as_of else ObligationStatus.OPEN
    return Obligation(row.regime, ObligationKind(row.kind), row.due_on, basis, status, row.system_id,
                      site_code, row.earliest_on, row.caused_by, None, row.detail)


def _obligation_rows(site_id: int, rows: DueRows) -> list[dict[str, Any]]:
    return [
        {
            "site_id": site_id, "system_id": ob.system_id, "regime": ob.regime, "kind": ob.kind.value,
            "due_on": ob.due_on, "earliest_on": ob.earliest_on, "citation": ob.basis.citation,
            "confidence": ob.basis.confidence.value, "basis_note": ob.basis.note, "caused_by": ob.caused_by,
            "detail": ob.detail, "earlier_missed": n,
        }
        for ob, n in zip(rows.obligations, rows.missed, strict=True)
    ]


def _intact(candidates: set[int], kept_sites: Mapping[int, Any], ob_rows: Sequence[Any],
            fin_rows: Sequence[Any]) -> set[int]:
    """Those candidate sites whose kept rows match the digest kept with them."""
    obs: dict[int, list[Any]] = {sid: [] for sid in candidates}
    fins: dict[int, list[Any]] = {sid: [] for sid in candidates}
    for r in ob_rows:
        if r.site_id in obs:
            obs[r.site_id].append(r)
    for r in fin_rows:
        if r.site_id in fins:
            fins[r.site_id].append(r)
    return {sid for sid in candidates if kept_sites[sid].content == kept_content(kept_sites[sid], obs[sid], fins[sid])}


def _read_back(ob_rows: Iterable[Any], fin_rows: Iterable[Any], codes: Mapping[int, str],
               as_of: date) -> dict[int, DueRows]:
    """Kept rows as the `DueRows` of their sites (statuses as of ``as_of``)."""
    found: dict[int, DueRows] = {}
    bases: dict[tuple, Basis] = {}
    for row in ob_rows:
        part = found.setdefault(row.site_id, DueRows())
        part.obligations.append(_kept_obligation(row, codes[row.site_id], as_of, bases))
        part.missed.append(row.earlier_missed)
    for row in fin_rows:
        found.setdefault(row.site_id, DueRows()).findings.append(
            Finding(row.source, row.message, Severity(row.severity), row.field))
    return found


def due_by_site(
    db: Database, *, as_of: date, site_code: str | None, recompute: bool, fresh: FreshDueStep[T]
) -> tuple[dict[str, DueRows], T]:
    """What `due` shows of every site (or one) on ``as_of``: kept rows where they are current,
    else ``fresh(conn, site_ids)`` for the other sites (then kept for next time).

    Args:
        recompute: reuse nothing: every site goes to ``fresh``.
        fresh: the pipeline step; called once, inside the read transaction, with the ids of
            the sites to compute (possibly none). It returns each site's `FreshDue` and
            whatever else it read in that transaction, returned here beside the rows.

    Returns:
        Site code -> its rows (every site of the scope that has any), and ``fresh``'s extra.
    """
    with db.read() as conn:
        if site_code is not None:
            repo.get_site(site_code, conn=conn)  # NotFound, with the usual message
        revisions = repo.site_revisions(site_code, conn=conn)  # read before the histories (PostgreSQL:
        # a record committed in between leaves the kept rows stale, never wrong)
        kept_sites = repo.load_kept_sites(None if site_code is None else list(revisions), conn=conn)
        heads = site_heads(conn, list(revisions))
        usable = set() if recompute else {
            sid for sid, (_, rev, _) in revisions.items()
            if _usable(kept_sites.get(sid), rev, as_of) and kept_sites[sid].inputs == heads[sid]
        }
        ob_rows, fin_rows = repo.load_kept(sorted(usable), conn=conn,
                                           everything=site_code is None and len(usable) == len(revisions))
        intact = _intact(usable, kept_sites, ob_rows, fin_rows)
        codes = {sid: code for sid, (code, _, _) in revisions.items()}
        kept = _read_back((r for r in ob_rows if r.site_id in intact), (r for r in fin_rows if r.site_id in intact),
                          codes, as_of)
        computed, extra = fresh(conn, sorted(set(revisions) - intact))

    now = datetime.now(UTC)
    keep_sites: list[dict[str, Any]] = []
    keep_obs: list[dict[str, Any]] = []
    keep_fins: list[dict[str, Any]] = []
    for sid, done in computed.items():
        if done.newest_on is not None and done.newest_on > as_of:
            continue  # records dated after the day asked for: good for that day only
        open_due = [ob.due_on for ob in done.rows.obligations if ob.status is ObligationStatus.OPEN]
        site_row = {"site_id": sid, "as_of": as_of, "fresh_until": min(open_due, default=None),
                    "rules_key": rules_key(), "revision": revisions[sid][1], "computed_at": now, "inputs": heads[sid]}
        ob_dicts = _obligation_rows(sid, done.rows)
        fin_dicts = [{"site_id": sid, "source": f.source, "message": f.message, "severity": f.severity.value,
                      "field": f.field} for f in done.rows.findings]
        site_row["content"] = kept_content(site_row, ob_dicts, fin_dicts)
        keep_sites.append(site_row)
        keep_obs.extend(ob_dicts)
        keep_fins.extend(fin_dicts)
    if keep_sites:
        keep_if_free(db, lambda conn: repo.replace_kept(conn=conn, sites=keep_sites, obligations=keep_obs,
                                                         findings=keep_fins))
    shown = {codes[sid]: rows for sid, rows in kept.items()}
    shown.update((codes[sid], done.rows) for sid, done in computed.items())
    return shown, extra


# --- kept annual parts --------------------------------------------------------------------------

_PLAIN = frozenset({("decimal", "Decimal"), ("datetime", "date"), ("datetime", "datetime")})


class _PlainUnpickler(pickle.Unpickler):
    """Unpickles plain values, Decimals and dates only: a kept body never runs code."""

    def find_class(self, module: str, name: str) -> Any:
        if (module, name) not in _PLAIN:
            raise pickle.UnpicklingError(f"kept_annual: {module}.{name} is not a plain value")
        return super().find_class(module, name)


def pack(part: Any) -> bytes:
    """A kept body: the fields of a part (a dataclass of plain values), in field order."""
    return pickle.dumps(tuple(getattr(part, f.name) for f in fields(part)), protocol=pickle.HIGHEST_PROTOCOL)


class _SitePart(Protocol):
    """A kept part: a dataclass of plain values that names its site."""

    @property
    def site_code(self) -> str: ...


P = TypeVar("P", bound=_SitePart)


def unpack(body: bytes, part_type: Callable[..., P]) -> P | None:
    """A kept part, or None when the body cannot be read (then the site is computed again)."""
    try:
        return part_type(*_PlainUnpickler(io.BytesIO(body)).load())
    except (pickle.UnpicklingError, ValueError, TypeError, EOFError):
        return None


def annual_parts(
    db: Database,
    *,
    year: int,
    as_of: date,
    site_code: str | None,
    recompute: bool,
    basis: Callable[[list[Any]], str],
    part_type: Callable[..., P],
    fresh: Callable[[Any, list[int], str], list[P]],
) -> tuple[list[P], str]:
    """Every site's part of an annual summary (sites with systems; or one site's): kept parts
    where they are current, else ``fresh(conn, site_ids, basis)`` (then kept for next time).

    Args:
        basis: picks the GWP basis from the sites in scope (`Site` records); kept parts are
            per basis.
        part_type: the part's dataclass (its fields are what is kept; each has ``site_code``).
        fresh: the pipeline step; called once inside the read transaction with the ids of the
            sites to build (possibly none) and the basis. Parts it returns for a site outside
            the scope are used but not kept.

    Returns:
        The parts (kept and fresh, in no particular order) and the basis chosen.
    """
    key = rules_key()
    with db.read() as conn:
        if site_code is not None:
            repo.get_site(site_code, conn=conn)  # NotFound, with the usual message
        # revisions are read before the histories (PostgreSQL: a record committed in between
        # leaves the kept part stale, never wrong)
        revisions = {sid: r for sid, r in repo.site_revisions(site_code, conn=conn).items() if r[2]}
        sites = [s for s in repo.list_sites(conn=conn) if s.id in revisions]
        chosen = basis(sites)
        kept_rows = repo.load_kept_annual(year, chosen, None if site_code is None else list(revisions), conn=conn)
        heads = site_heads(conn, list(revisions))
        parts: list[P] = []
        stale: list[int] = []
        for sid, (_, revision, _) in revisions.items():
            row = kept_rows.get(sid)
            part = None
            if (not recompute and row is not None and row.as_of == as_of and row.rules_key == key
                    and row.revision == revision and row.inputs == heads[sid] and row.content == annual_content(row)):
                part = unpack(row.body, part_type)
            if part is None:
                stale.append(sid)
            else:
                parts.append(part)
        computed = fresh(conn, stale, chosen)
    parts.extend(computed)
    if computed:
        ids = {code: sid for sid, (code, _, _) in revisions.items()}
        now = datetime.now(UTC)
        rows = []
        for part in computed:
            site_id = ids.get(part.site_code)
            if site_id is None:
                continue
            row = {"site_id": site_id, "year": year, "basis": chosen, "as_of": as_of, "rules_key": key,
                   "revision": revisions[site_id][1], "computed_at": now, "body": pack(part),
                   "inputs": heads[site_id]}
            row["content"] = annual_content(row)
            rows.append(row)
        keep_if_free(db, lambda conn: repo.replace_kept_annual(conn=conn, rows=rows))
    return parts, chosen
