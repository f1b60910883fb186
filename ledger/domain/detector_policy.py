"""Ties detector episodes to the ledger: a leak check after a high reading, doubts about a repair.

These are site policy, not law. No regulation covered here requires a leak check because a
fixed detector read high; but a reading above the second level is exactly when a technician
should look, so the ledger asks for a check within ``CHECK_WITHIN_DAYS`` days and shows it in
`due` under the regime code ``site-policy``, with the basis saying plainly that it is policy.

Pure: episodes and events in, obligations and findings out; ``as_of`` is passed in.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import date, datetime

from ledger.domain.dates import add_days
from ledger.domain.records import (
    Basis,
    Confidence,
    Event,
    EventKind,
    Finding,
    FollowUpResult,
    Obligation,
    ObligationKind,
    ObligationStatus,
    Severity,
)
from ledger.domain.state import effective_events

POLICY_REGIME = "site-policy"
# Days after the start of an episode above level 2 within which a leak check is asked for.
# Our choice (a week covers a weekend and a technician's round); sites may want shorter.
CHECK_WITHIN_DAYS = 7
TRIGGER_LEVEL = 2  # the second alarm level: "call a technician" in common practice
# A return above level 1 within this many days of a repair puts its follow-up in doubt.
RETURN_WITHIN_DAYS = 30

POLICY_BASIS = Basis(
    "site policy: leak check after a detector episode above level 2 (not a legal duty)",
    Confidence.POLICY,
)


@dataclass(frozen=True, slots=True)
class StoredEpisode:
    """An episode as the ledger keeps it, dated in the site's own calendar."""

    channel: str
    level: int
    start_at: datetime
    end_at: datetime
    start_on: date  # site-local date of start_at
    peak_ppm: float


def episode_obligations(
    system_id: int,
    site_code: str,
    episodes: Sequence[StoredEpisode],
    events: Sequence[Event],
    as_of: date,
) -> list[Obligation]:
    """A leak-check obligation for each episode above level 2 not followed by a check.

    Episodes that start while an earlier one's window is still open join that obligation,
    so a leak that trips the detector every night yields one request, not thirty.

    Args:
        system_id: the system the channel watches.
        site_code: its site.
        episodes: the channel's stored episodes (any level; others are ignored).
        events: the system's events (voids applied here).
        as_of: the day to evaluate.
    """
    kept = effective_events(events)
    checks = sorted(e.performed_on for e in kept if e.kind is EventKind.CHECK)
    found: list[Obligation] = []
    window_end: date | None = None
    for ep in sorted((e for e in episodes if e.level >= TRIGGER_LEVEL), key=lambda e: e.start_at):
        if ep.start_on > as_of:
            continue
        if window_end is not None and ep.start_on <= window_end:
            continue
        due_on = add_days(ep.start_on, CHECK_WITHIN_DAYS)
        window_end = due_on
        # The first check on or after the episode meets it, late or not: a late check still
        # answers the question the readings raised.
        met = next((d for d in checks if ep.start_on <= d <= as_of), None)
        met_event = None
        if met is not None:
            met_event = next(e.id for e in kept if e.kind is EventKind.CHECK and e.performed_on == met)
            status = ObligationStatus.MET
        else:
            status = ObligationStatus.OVERDUE if as_of > due_on else ObligationStatus.OPEN
        found.append(
            Obligation(
                regime=POLICY_REGIME,
                kind=ObligationKind.LEAK_CHECK,
                due_on=due_on,
                basis=POLICY_BASIS,
                status=status,
                system_id=system_id,
                site_code=site_code,
                earliest_on=ep.start_on,
                met_by=met_event,
                detail=(
                    f"leak check after detector {ep.channel} read above level {ep.level} "
                    f"(peak {ep.peak_ppm:.0f} ppm) from {ep.start_at:%Y-%m-%d %H:%M} UTC"
                ),
            )
        )
    return found


def repair_findings(system_label: str, episodes: Sequence[StoredEpisode], events: Sequence[Event]) -> list[Finding]:
    """Findings where readings rose again soon after a repair whose follow-up passed."""
    kept = effective_events(events)
    findings = []
    for repair in (e for e in kept if e.kind is EventKind.REPAIR):
        later = sorted(
            (ep for ep in episodes if ep.level >= 1 and ep.start_on > repair.performed_on),
            key=lambda ep: ep.start_at,
        )
        if not later:
            continue
        days = (later[0].start_on - repair.performed_on).days
        if days > RETURN_WITHIN_DAYS:
            continue
        passed = [
            e
            for e in kept
            if e.kind is EventKind.FOLLOW_UP
            and e.result == FollowUpResult.PASS
            and e.performed_on >= repair.performed_on
        ]
        about = (
            f"the follow-up check of {passed[0].performed_on.isoformat()} is questionable"
            if passed
            else "no follow-up check has passed since"
        )
        findings.append(
            Finding(
                source=f"{system_label} detector {later[0].channel}",
                message=(
                    f"readings rose above level 1 {days} days after the repair of "
                    f"{repair.performed_on.isoformat()} (peak {later[0].peak_ppm:.0f} ppm); {about}"
                ),
                severity=Severity.WARNING,
            )
        )
    return findings
