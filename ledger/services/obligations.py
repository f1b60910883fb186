"""What is due: the estate's obligations on a day, filtered and sorted earliest first."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import Any

from ledger.domain.detector_policy import StoredEpisode, episode_obligations, repair_findings
from ledger.domain.records import (
    Finding,
    Obligation,
    ObligationKind,
    ObligationStatus,
    SystemHistory,
)
from ledger.reference import load_reference
from ledger.services.queries import labels_of, obligation_json
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


def compute(
    histories: list[SystemHistory],
    as_of: date,
    episodes: dict[int, list[StoredEpisode]] | None = None,
) -> tuple[list[Obligation], list[Finding]]:
    """Every obligation of these systems on ``as_of`` (met ones included), with findings.

    Args:
        histories: the systems to evaluate.
        as_of: the day.
        episodes: stored detector episodes by system id; they add site-policy leak checks
            and findings about repairs that readings put in doubt.
    """
    from ledger.rules import compute_all

    obligations, findings = compute_all(histories, load_reference(), as_of)
    if episodes:
        for h in histories:
            eps = episodes.get(h.system.id)
            if not eps:
                continue
            obligations.extend(episode_obligations(h.system.id, h.site.code, eps, h.events, as_of))
            findings.extend(repair_findings(f"{h.site.code}/{h.system.tag}", eps, h.events))
        obligations.sort(key=lambda o: (o.due_on, o.site_code or "", o.system_id or 0, o.kind.value))
    return obligations, findings


def load_with_episodes(
    db: Database, *, site_code: str | None = None, system_id: int | None = None
) -> tuple[list[SystemHistory], dict[int, list[StoredEpisode]]]:
    """Histories and their stored detector episodes, in one read transaction."""
    from ledger.services.detectors import stored_episodes

    with db.read() as conn:
        histories = repo.load_histories(site_code, conn=conn, system_id=system_id)
        zones = {h.system.id: h.site.timezone for h in histories}
        ids = None if site_code is None and system_id is None else list(zones)
        episodes = stored_episodes(conn, ids, zones)
    return histories, episodes


def due(
    db: Database,
    *,
    as_of: date,
    within_days: int | None = None,
    site_code: str | None = None,
    overdue_only: bool = False,
) -> DueList:
    """Open and overdue obligations across the estate (or one site), earliest first.

    Args:
        as_of: the day to evaluate.
        within_days: only obligations due within this many days of ``as_of`` (overdue
            ones always show).
        site_code: only this site.
        overdue_only: only overdue obligations.
    """
    histories, episodes = load_with_episodes(db, site_code=site_code)
    obligations, findings = compute(histories, as_of, episodes)
    current, missed = current_only(obligations)
    labels = labels_of(histories)
    rows = []
    for i, ob in enumerate(current):
        if ob.status is ObligationStatus.MET:
            continue
        if overdue_only and ob.status is not ObligationStatus.OVERDUE:
            continue
        if within_days is not None and ob.status is ObligationStatus.OPEN and (ob.due_on - as_of).days > within_days:
            continue
        row = obligation_json(ob, labels)
        row["earlier_periods_missed"] = missed.get(i, 0) if ob.kind in PERIODIC else None
        rows.append(row)
    rows.sort(key=lambda r: (r["due_on"], r["site"] or "", r["system"] or "", r["kind"]))
    return DueList(as_of, rows, findings)
