"""What is due: the estate's obligations on a day, filtered and sorted earliest first."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from datetime import date
from typing import Any

from ledger.domain.detector_policy import StoredEpisode, episode_obligations, repair_findings
from ledger.domain.records import (
    Filing,
    Finding,
    Obligation,
    ObligationKind,
    ObligationStatus,
    SystemHistory,
)
from ledger.errors import InputError
from ledger.reference import load_reference
from ledger.services.kept import DueRows, FreshDue, due_by_site
from ledger.services.rows import obligation_json
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


def _unmet_current(obligations: list[Obligation]) -> tuple[list[Obligation], list[int | None]]:
    """`current_only` without the met rows, with each row's earlier-missed count (None for
    one-off duties)."""
    current, counts = current_only(obligations)
    shown: list[Obligation] = []
    missed: list[int | None] = []
    for i, ob in enumerate(current):
        if ob.status is ObligationStatus.MET:
            continue
        shown.append(ob)
        missed.append(counts.get(i, 0) if ob.kind in PERIODIC else None)
    return shown, missed


def site_due(histories: Sequence[SystemHistory], reference: Any, as_of: date) -> FreshDue:
    """What `due` shows of one site from its records (pure): the rules' unmet current
    obligations with their earlier-missed counts and findings, before detector episodes and
    filings (those are applied on every run, kept rows or not)."""
    from ledger.rules import compute_all

    obligations, found = compute_all(list(histories), reference, as_of)
    shown, missed = _unmet_current(obligations)
    newest = max((e.performed_on for h in histories for e in h.events), default=None)
    return FreshDue(DueRows(shown, missed, found), newest)


@dataclass(frozen=True, slots=True)
class _Beside:
    """What `due` reads beside the sites' rows, in the same transaction."""

    places: dict[int, tuple[str, str, str]]
    episodes: dict[int, list[StoredEpisode]]
    with_episodes: list[SystemHistory]
    filings: list[Filing]


def _fresh_due(conn: Any, site_ids: list[int], *, as_of: date, site_code: str | None
               ) -> tuple[dict[int, FreshDue], _Beside]:
    """The pipeline step `kept.due_by_site` wraps: these sites' rows from their records, and
    the places, detector episodes and filings of the scope."""
    from ledger.services.detectors import stored_episodes

    places = repo.system_places(site_code, conn=conn)
    histories = repo.load_histories(conn=conn, site_ids=site_ids) if site_ids else []
    zones = {sid: tz for sid, (_, _, tz) in places.items()}
    episodes = stored_episodes(conn, None if site_code is None else list(places), zones)
    loaded = {h.system.id for h in histories}
    extra = [sid for sid in episodes if sid not in loaded]
    with_episodes = [h for h in histories if h.system.id in episodes]
    if extra:
        with_episodes += repo.load_histories(conn=conn, system_ids=extra)
    filings = [f for f in repo.load_filings(site_code, conn=conn) if f.filed_on <= as_of]
    reference = load_reference()
    by_site: dict[int, list[SystemHistory]] = {}
    for h in histories:
        by_site.setdefault(h.site.id, []).append(h)
    computed = {sid: site_due(members, reference, as_of) for sid, members in by_site.items()}
    return computed, _Beside(places, episodes, with_episodes, filings)


def _shown_on(
    db: Database, as_of: date, site_code: str | None, recompute: bool = False
) -> tuple[DueRows, dict[int, tuple[str, str, str]]]:
    """The unmet current obligations and findings of the estate (or one site) on ``as_of``:
    each site's rows (kept or fresh, see `kept.due_by_site`), then detector episodes and
    filings applied."""
    per_site, beside = due_by_site(db, as_of=as_of, site_code=site_code, recompute=recompute,
                                   fresh=lambda conn, ids: _fresh_due(conn, ids, as_of=as_of, site_code=site_code))
    shown = DueRows()
    for code in sorted(per_site):
        part = per_site[code]
        shown.obligations.extend(part.obligations)
        shown.missed.extend(part.missed)
        shown.findings.extend(part.findings)

    # Detector episodes and filings: applied on every run (they change without new events).
    episode_obs, episode_findings = _episode_evidence(beside.with_episodes, beside.episodes, as_of)
    shown.findings.extend(episode_findings)
    ep_shown, ep_missed = _unmet_current(episode_obs)
    shown.obligations.extend(ep_shown)
    shown.missed.extend(ep_missed)
    if beside.filings:
        filed = apply_filings(shown.obligations, beside.filings)
        unmet = [i for i, ob in enumerate(filed) if ob.status is not ObligationStatus.MET]
        shown.obligations = [filed[i] for i in unmet]
        shown.missed = [shown.missed[i] for i in unmet]
    shown.findings = list(dict.fromkeys(shown.findings))
    return shown, beside.places


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
