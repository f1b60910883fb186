"""What is due: the estate's obligations on a day, filtered and sorted earliest first."""

from __future__ import annotations

import functools
import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from datetime import UTC, date, datetime
from itertools import groupby
from typing import Any

from ledger.domain.detector_policy import StoredEpisode, episode_obligations, repair_findings
from ledger.domain.records import (
    Basis,
    Confidence,
    Filing,
    Finding,
    Obligation,
    ObligationKind,
    ObligationStatus,
    Severity,
    SystemHistory,
)
from ledger.errors import InputError
from ledger.reference import load_reference
from ledger.services.queries import obligation_json
from ledger.store import repository as repo
from ledger.store.db import Database

# Kinds that recur each period. Only the latest period of each series is actionable: an
# earlier period that passed without its check cannot be made good any more; it stays in the
# record as missed (reports count it) but is not "due".
PERIODIC = frozenset(
    {
        ObligationKind.LEAK_CHECK,
        ObligationKind.LEAK_INSPECTION,
        ObligationKind.DETECTION_SYSTEM_CHECK,
    }
)


def current_only(obligations: list[Obligation]) -> tuple[list[Obligation], dict[int, int]]:
    """Keep, per periodic series, only the first period not met since the last met one.

    A series is (regime, system or facility, kind). Periods that passed unmet *before* the
    last met period cannot be made good any more: they are counted, not shown. Periods after
    the last met one collapse into the first of them: if it is past, the system is overdue
    from that day until a check is logged, however many periods have begun since.

    Returns:
        The obligations to show, and for each kept periodic one (by index) how many periods
        before its series' last met period passed unmet.
    """
    series: dict[tuple, list[Obligation]] = {}
    for ob in obligations:
        if ob.kind in PERIODIC:
            series.setdefault((ob.regime, ob.system_id, ob.site_code, ob.kind), []).append(ob)
    shown: set[int] = set()
    missed_of: dict[int, int] = {}
    for members in series.values():
        members.sort(key=lambda o: o.due_on)
        last_met = max((i for i, o in enumerate(members) if o.status is ObligationStatus.MET), default=-1)
        earlier = sum(1 for o in members[: max(last_met, 0)] if o.status is ObligationStatus.OVERDUE)
        pending = members[last_met + 1 :]
        if pending:
            shown.add(id(pending[0]))
            missed_of[id(pending[0])] = earlier
    kept = [ob for ob in obligations if ob.kind not in PERIODIC or id(ob) in shown]
    counts = {i: missed_of[id(ob)] for i, ob in enumerate(kept) if id(ob) in missed_of}
    return kept, counts


@dataclass(frozen=True, slots=True)
class DueList:
    """The obligations a `due` command shows, with the findings the rules raised."""

    as_of: date
    rows: list[dict[str, Any]]
    findings: list[Finding]


@dataclass(frozen=True, slots=True)
class Evidence:
    """What the ledger holds beside the events that bears on obligations."""

    episodes: dict[int, list[StoredEpisode]] = field(default_factory=dict)  # by system id
    filings: list[Filing] = field(default_factory=list)


def apply_filings(obligations: list[Obligation], filings: list[Filing]) -> list[Obligation]:
    """Mark report obligations met by a recorded filing.

    A filing meets a report of its site and regime that falls due in the year after the
    period it covers (reports for a calendar year are due early in the next); one naming a
    system meets only that system's report.
    """
    if not filings:
        return obligations
    out = []
    for ob in obligations:
        if ob.kind is ObligationKind.REPORT and ob.status is not ObligationStatus.MET:
            match = next(
                (f for f in filings
                 if f.regime == ob.regime and f.site_code == ob.site_code and f.period_year == ob.due_on.year - 1
                 and (f.system_id is None or f.system_id == ob.system_id)),
                None,
            )
            if match is not None:
                late = " (late)" if match.filed_on > ob.due_on else ""
                ref = f", reference {match.reference}" if match.reference else ""
                ob = replace(ob, status=ObligationStatus.MET,
                             detail=f"{ob.detail}; filed {match.filed_on.isoformat()}{late}{ref}")
        out.append(ob)
    return out


def compute(
    histories: list[SystemHistory],
    as_of: date,
    evidence: Evidence | None = None,
) -> tuple[list[Obligation], list[Finding]]:
    """Every obligation of these systems on ``as_of`` (met ones included), with findings.

    Args:
        histories: the systems to evaluate.
        as_of: the day.
        evidence: stored detector episodes (they add site-policy leak checks and findings
            about repairs that readings put in doubt) and report filings (they meet report
            obligations).
    """
    from ledger.rules import compute_all

    obligations, findings = compute_all(histories, load_reference(), as_of)
    if evidence is None:
        return obligations, findings
    episode_obs, episode_findings = _episode_evidence(histories, evidence.episodes, as_of)
    obligations.extend(episode_obs)
    findings.extend(episode_findings)
    obligations = apply_filings(obligations, [f for f in evidence.filings if f.filed_on <= as_of])
    obligations.sort(key=lambda o: (o.due_on, o.site_code or "", o.system_id or 0, o.kind.value))
    return obligations, findings


def _episode_evidence(
    histories: Sequence[SystemHistory], episodes: dict[int, list[StoredEpisode]], as_of: date
) -> tuple[list[Obligation], list[Finding]]:
    """Site-policy leak checks opened by stored detector episodes, and findings about repairs
    the readings put in doubt, for those of these systems that have episodes."""
    obligations: list[Obligation] = []
    findings: list[Finding] = []
    for h in histories:
        eps = episodes.get(h.system.id)
        if eps:
            obligations.extend(episode_obligations(h.system.id, h.site.code, eps, h.events, as_of))
            findings.extend(repair_findings(f"{h.site.code}/{h.system.tag}", eps, h.events))
    return obligations, findings


def load_evidence(
    db: Database, *, site_code: str | None = None, system_id: int | None = None
) -> tuple[list[SystemHistory], Evidence]:
    """Histories with their stored detector episodes and the sites' filings, in one read."""
    from ledger.services.detectors import stored_episodes

    with db.read() as conn:
        histories = repo.load_histories(site_code, conn=conn, system_id=system_id)
        zones = {h.system.id: h.site.timezone for h in histories}
        ids = None if site_code is None and system_id is None else list(zones)
        episodes = stored_episodes(conn, ids, zones)
        sites = {h.site.code for h in histories}
        filings = [f for f in repo.load_filings(site_code, conn=conn) if f.site_code in sites]
    return histories, Evidence(episodes, filings)


# --- kept obligations -----------------------------------------------------------------------
#
# `due` keeps, per site, the obligations it showed (the current period of each periodic series
# and every unmet one-off duty, with the count of earlier missed periods) and the rules'
# findings, in the kept_* tables. A later `due` reuses a site's kept rows instead of running
# the rules over its history when all of these hold:
#
# * the site's revision is the one kept (triggers raise it with every event, void, system,
#   filing or detector episode added to the site; see tables.site_revision);
# * the rules and reference data are those of `rules_key()`;
# * the day asked for is on or after the day they were computed for, in the same calendar
#   year, with no regime date in between, and not after the earliest due day of a duty that
#   was open then (`fresh_until`): until then no status and no wording can change;
# * no event of the site was dated after the day they were computed for.
#
# * the site's inputs are those kept: the chain head of each of its systems and its site and
#   system rows as they are now (`site_inputs`), so an event added or removed behind the
#   triggers' back, or a system fact changed in place, makes the rows stale;
# * the kept rows still match the digest kept with them (`kept_content`): a kept row removed
#   or altered makes the site computed again, never silently absent.
#
# Under those conditions the rows shown are the same (tests/services/test_kept.py holds the
# two paths to that): nothing new happened, nothing open fell due, a periodic series' first
# unmet period stays the first and later periods collapse into it. Otherwise the site is
# computed again (and kept again). Detector episodes and filings are applied on every run.

KEEP_FORMAT = "3"  # bump when what is kept, or how it is read back, changes


# The code kept results depend on: a change to any of these files makes every kept row stale,
# so nobody has to remember to bump a version for a kept row to follow a rule change.
_KEPT_SOURCES = ("domain", "rules", "reference", "units.py", "services/obligations.py", "services/reporting.py")


@functools.cache
def rules_key() -> str:
    """A digest of everything besides the records that the kept rows depend on: the format of
    what is kept, the tool version, and the source of the rules, the domain records, the
    reference data (CSV files included) and the two services that build kept rows."""
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
    """The digest kept with a site's kept rows: its `kept_site` fields and every obligation and
    finding row (in any order). A row removed, added or altered changes it.

    Args:
        site_row: the `kept_site` row or the dict written for it.
        obligations, findings: that site's rows (rows or dicts; ``id`` is ignored).
    """
    get = site_row.get if isinstance(site_row, dict) else lambda k: getattr(site_row, k)
    head = _canon([get(k) for k in _KEPT_SITE_FIELDS])
    rows = sorted(_canon(_row_dict(r)) for r in obligations) + ["|"] + sorted(_canon(_row_dict(r)) for r in findings)
    return hashlib.sha256("\n".join([head, *rows]).encode()).hexdigest()


def site_inputs(conn: Any, site_ids: Sequence[int]) -> dict[int, str]:
    """Site id -> a digest of what its kept results were computed from besides the rules: the
    site row, each system row and each system's chain head as they are now."""
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
    heads = repo.chain_heads([r["id"] for r in systems], conn=conn)
    for r in systems:
        parts[r["site_id"]].append(_canon([dict(r), heads.get(r["id"])]))
    return {sid: hashlib.sha256("\n".join(p).encode()).hexdigest() for sid, p in parts.items()}


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


@dataclass(slots=True)
class _Shown:
    """The rows `due` shows and the findings, gathered from kept and freshly computed sites."""

    obligations: list[Obligation] = field(default_factory=list)
    missed: list[int | None] = field(default_factory=list)  # earlier periods missed, per obligation
    findings: list[Finding] = field(default_factory=list)


def _kept_obligation(row: Any, site_code: str, as_of: date, bases: dict[tuple, Basis]) -> Obligation:
    key = (row.citation, row.confidence, row.basis_note)
    basis = bases.get(key)
    if basis is None:
        basis = bases[key] = Basis(row.citation, Confidence(row.confidence), row.basis_note)
    status = ObligationStatus.OVERDUE if row.due_on < as_of else ObligationStatus.OPEN
    return Obligation(row.regime, ObligationKind(row.kind), row.due_on, basis, status, row.system_id,
                      site_code, row.earliest_on, row.caused_by, None, row.detail)


def _keep_rows(site_id: int, obligations: list[Obligation], missed: list[int | None]) -> list[dict[str, Any]]:
    return [
        {
            "site_id": site_id, "system_id": ob.system_id, "regime": ob.regime, "kind": ob.kind.value,
            "due_on": ob.due_on, "earliest_on": ob.earliest_on, "citation": ob.basis.citation,
            "confidence": ob.basis.confidence.value, "basis_note": ob.basis.note, "caused_by": ob.caused_by,
            "detail": ob.detail, "earlier_missed": n,
        }
        for ob, n in zip(obligations, missed, strict=True)
    ]


def _unmet_current(obligations: list[Obligation]) -> tuple[list[Obligation], list[int | None]]:
    """`current_only` without the met rows, with each row's earlier-missed count (None for
    one-off duties)."""
    kept, counts = current_only(obligations)
    shown: list[Obligation] = []
    missed: list[int | None] = []
    for i, ob in enumerate(kept):
        if ob.status is ObligationStatus.MET:
            continue
        shown.append(ob)
        missed.append(counts.get(i, 0) if ob.kind in PERIODIC else None)
    return shown, missed


def _shown_on(
    db: Database, as_of: date, site_code: str | None, recompute: bool = False
) -> tuple[_Shown, dict[int, tuple[str, str, str]]]:
    """The unmet current obligations and findings of the estate (or one site) on ``as_of``,
    from kept rows where they are current, else from the rules (and kept for next time)."""
    from ledger.rules import compute_all
    from ledger.services.detectors import stored_episodes

    with db.read() as conn:
        if site_code is not None:
            repo.get_site(site_code, conn=conn)  # NotFound, with the usual message
        heads = repo.site_revisions(site_code, conn=conn)  # read before the histories (PostgreSQL:
        # a record committed in between leaves the kept rows stale, never wrong)
        kept_sites = repo.load_kept_sites(None if site_code is None else list(heads), conn=conn)
        inputs = site_inputs(conn, list(heads))
        usable = set() if recompute else {
            sid for sid, (_, rev, _) in heads.items()
            if _usable(kept_sites.get(sid), rev, as_of) and kept_sites[sid].inputs == inputs[sid]
        }
        ob_rows, fin_rows = repo.load_kept(sorted(usable), conn=conn,
                                           everything=site_code is None and len(usable) == len(heads))
        fresh = _intact(usable, kept_sites, ob_rows, fin_rows)
        ob_rows = [r for r in ob_rows if r.site_id in fresh]
        fin_rows = [r for r in fin_rows if r.site_id in fresh]
        stale = sorted(set(heads) - fresh)
        places = repo.system_places(site_code, conn=conn)
        histories = repo.load_histories(conn=conn, site_ids=stale) if stale else []
        zones = {sid: tz for sid, (_, _, tz) in places.items()}
        episodes = stored_episodes(conn, None if site_code is None else list(places), zones)
        loaded = {h.system.id for h in histories}
        extra = [sid for sid in episodes if sid not in loaded]
        with_episodes = [h for h in histories if h.system.id in episodes]
        if extra:
            with_episodes += repo.load_histories(conn=conn, system_ids=extra)
        filings = [f for f in repo.load_filings(site_code, conn=conn) if f.filed_on <= as_of]

    code_of = {sid: code for sid, (code, _, _) in heads.items()}
    site_of_code = {code: sid for sid, code in code_of.items()}
    per_site: dict[str, _Shown] = {}
    bases: dict[tuple, Basis] = {}
    for row in ob_rows:
        code = code_of[row.site_id]
        part = per_site.setdefault(code, _Shown())
        part.obligations.append(_kept_obligation(row, code, as_of, bases))
        part.missed.append(row.earlier_missed)
    for row in fin_rows:
        per_site.setdefault(code_of[row.site_id], _Shown()).findings.append(
            Finding(row.source, row.message, Severity(row.severity), row.field))

    # Sites whose kept rows are not current: run the rules, and keep what they give.
    reference = load_reference()
    keep_sites: list[dict[str, Any]] = []
    keep_obs: list[dict[str, Any]] = []
    keep_fins: list[dict[str, Any]] = []
    now = datetime.now(UTC)
    for code, group in groupby(histories, key=lambda h: h.site.code):
        members = list(group)
        obligations, found = compute_all(members, reference, as_of)
        shown, missed = _unmet_current(obligations)
        per_site[code] = _Shown(shown, missed, found)
        events = [e for h in members for e in h.events]
        if any(e.performed_on > as_of for e in events):
            continue  # records dated after the day asked for: good for that day only
        sid = site_of_code[code]
        open_due = [ob.due_on for ob in shown if ob.status is ObligationStatus.OPEN]
        site_row = {"site_id": sid, "as_of": as_of, "fresh_until": min(open_due, default=None),
                    "rules_key": rules_key(), "revision": heads[sid][1], "computed_at": now, "inputs": inputs[sid]}
        ob_dicts = _keep_rows(sid, shown, missed)
        fin_dicts = [{"site_id": sid, "source": f.source, "message": f.message, "severity": f.severity.value,
                      "field": f.field} for f in found]
        site_row["content"] = kept_content(site_row, ob_dicts, fin_dicts)
        keep_sites.append(site_row)
        keep_obs.extend(ob_dicts)
        keep_fins.extend(fin_dicts)
    if keep_sites:
        _keep(db, keep_sites, keep_obs, keep_fins)

    shown = _Shown()
    for code in sorted(per_site):
        part = per_site[code]
        shown.obligations.extend(part.obligations)
        shown.missed.extend(part.missed)
        shown.findings.extend(part.findings)

    # Detector episodes and filings: applied on every run (they change without new events).
    episode_obs, episode_findings = _episode_evidence(with_episodes, episodes, as_of)
    shown.findings.extend(episode_findings)
    ep_shown, ep_missed = _unmet_current(episode_obs)
    shown.obligations.extend(ep_shown)
    shown.missed.extend(ep_missed)
    if filings:
        filed = apply_filings(shown.obligations, filings)
        keep_idx = [i for i, ob in enumerate(filed) if ob.status is not ObligationStatus.MET]
        shown.obligations = [filed[i] for i in keep_idx]
        shown.missed = [shown.missed[i] for i in keep_idx]
    shown.findings = list(dict.fromkeys(shown.findings))
    return shown, places


def _intact(candidates: set[int], kept_sites: dict[int, Any], ob_rows: Sequence[Any],
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


def _keep(db: Database, sites: list[dict[str, Any]], obligations: list[dict[str, Any]],
          findings: list[dict[str, Any]]) -> None:
    """Store freshly computed rows for the next `due` (see `keep_if_free`)."""
    keep_if_free(db, lambda conn: repo.replace_kept(conn=conn, sites=sites, obligations=obligations,
                                                     findings=findings))


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


def due(
    db: Database,
    *,
    as_of: date,
    within_days: int | None = None,
    site_code: str | None = None,
    overdue_only: bool = False,
    recompute: bool = False,
    regime: str | None = None,
    kind: str | None = None,
) -> DueList:
    """Open and overdue obligations across the estate (or one site), earliest first.

    Args:
        as_of: the day to evaluate.
        within_days: only obligations due within this many days of ``as_of`` (overdue
            ones always show).
        site_code: only this site.
        overdue_only: only overdue obligations.
        recompute: ignore kept rows: run the rules over every site's records (and keep the
            result).
        regime: only obligations under this regime (a `REGIMES` code).
        kind: only obligations of this kind (e.g. ``leak-check``).
    """
    check_due_filters(regime=regime, kind=kind)
    with repo.gc_paused():
        shown, places = _shown_on(db, as_of, site_code, recompute)
    labels = {sid: (code, tag) for sid, (code, tag, _) in places.items()}
    rows = []
    for ob, missed in zip(shown.obligations, shown.missed, strict=True):
        if overdue_only and ob.status is not ObligationStatus.OVERDUE:
            continue
        if (regime is not None and ob.regime != regime) or (kind is not None and ob.kind.value != kind):
            continue
        if within_days is not None and ob.status is ObligationStatus.OPEN and (ob.due_on - as_of).days > within_days:
            continue
        row = obligation_json(ob, labels)
        row["earlier_periods_missed"] = missed
        rows.append(row)
    rows.sort(key=lambda r: (r["due_on"], r["site"] or "", r["system"] or "", r["kind"], r["regime"],
                             r["caused_by"] or 0, r["detail"]))
    return DueList(as_of, rows, shown.findings)


def check_due_filters(*, regime: str | None, kind: str | None) -> None:
    """Refuse a regime or obligation kind the ledger does not know (naming the allowed ones)."""
    from ledger.domain.records import ObligationKind
    from ledger.rules import REGIMES

    if regime is not None and regime not in REGIMES:
        raise InputError("--regime", regime, f"is not one of {', '.join(REGIMES)}")
    kinds = [k.value for k in ObligationKind]
    if kind is not None and kind not in kinds:
        raise InputError("--kind", kind, f"is not one of {', '.join(kinds)}")
