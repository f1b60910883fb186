"""Detector channels, readings import and review: readings become dated evidence for a system.

Readings live in a columnar store beside the database (``Location.readings_root``); the
database keeps channels and the episodes each review found, so `due`, `system show` and the
logbook can use them without rescanning readings.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, date, datetime, time, timedelta
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo

from ledger.domain.booking import book
from ledger.domain.detector_policy import StoredEpisode
from ledger.domain.records import EventKind, SystemHistory
from ledger.errors import Conflict, InputError, NotFound
from ledger.store import repository as repo
from ledger.store.db import Database

DEFAULT_LEVELS_PPM = (25.0, 100.0, 400.0)  # common practice, no source (docs/detectors.md)
DEFAULT_NIGHT = "22:00-06:00"


@dataclass(frozen=True, slots=True)
class Channel:
    """A detector channel as the ledger knows it."""

    id: int
    site_code: str
    code: str
    system_id: int
    system_tag: str
    levels_ppm: tuple[float, ...]
    night_start: str
    night_end: str


def parse_levels(text: str | None) -> tuple[float, ...]:
    """``25,100,400`` -> ascending positive ppm levels."""
    if not text:
        return DEFAULT_LEVELS_PPM
    try:
        levels = tuple(float(p) for p in text.split(","))
    except ValueError:
        raise InputError("--levels", text, "must be ppm numbers separated by commas, e.g. 25,100,400") from None
    if not levels or any(v <= 0 for v in levels) or list(levels) != sorted(set(levels)):
        raise InputError("--levels", text, "must be positive and strictly ascending")
    return levels


def parse_night(text: str | None) -> tuple[str, str]:
    """``22:00-06:00`` -> ("22:00", "06:00")."""
    value = text or DEFAULT_NIGHT
    start, sep, end = value.partition("-")
    try:
        if not sep:
            raise ValueError
        time.fromisoformat(start.strip())
        time.fromisoformat(end.strip())
    except ValueError:
        raise InputError("--night", value, "must be HH:MM-HH:MM, e.g. 22:00-06:00") from None
    return start.strip(), end.strip()


def _channel_row(r: Any) -> Channel:
    return Channel(
        r.id,
        r.site_code,
        r.code,
        r.system_id,
        r.tag,
        tuple(float(v) for v in r.levels_ppm.split(",")),
        r.night_start,
        r.night_end,
    )


def _channels_query():
    from sqlalchemy import select

    from ledger.store.tables import detector_channel, site, system

    return (
        select(detector_channel, site.c.code.label("site_code"), system.c.tag)
        .join(site, site.c.id == detector_channel.c.site_id)
        .join(system, system.c.id == detector_channel.c.system_id)
    )


def add_channel(
    db: Database,
    *,
    site_code: str,
    code: str,
    system_site: str,
    system_tag: str,
    levels: str | None,
    night: str | None,
) -> Channel:
    """Map a detector channel to the system it watches."""
    from sqlalchemy import insert

    from ledger.store.records import seal
    from ledger.store.results import inserted_id
    from ledger.store.tables import detector_channel

    levels_ppm = parse_levels(levels)
    night_start, night_end = parse_night(night)
    if system_site != site_code:
        raise InputError("--system", f"{system_site}/{system_tag}", f"must be a system of site {site_code}")
    with db.write() as conn:
        the_site, sys_ = repo.get_system(system_site, system_tag, conn=conn)
        if any(c.code == code for c in _list(conn, site_code)):
            raise Conflict(f"detector: {site_code}/{code!r} already exists")
        channel_id = inserted_id(
            conn,
            insert(detector_channel).values(
                site_id=the_site.id,
                code=code,
                system_id=sys_.id,
                levels_ppm=",".join(f"{v:g}" for v in levels_ppm),
                night_start=night_start,
                night_end=night_end,
                created_at=repo.now_utc(),
            )
        )
        seal("detector_channel", [channel_id], conn=conn)
        return next(c for c in _list(conn, site_code) if c.code == code)


def _list(conn: Any, site_code: str | None) -> list[Channel]:
    from ledger.store.tables import detector_channel, site

    stmt = _channels_query()
    if site_code:
        stmt = stmt.where(site.c.code == site_code)
    return [_channel_row(r) for r in conn.execute(stmt.order_by(site.c.code, detector_channel.c.code))]


def list_channels(db: Database, *, site_code: str | None = None) -> list[Channel]:
    """Every channel (or one site's)."""
    with db.read() as conn:
        return _list(conn, site_code)


def import_readings(db: Database, root: Path, path: Path, *, site_code: str, tz: str | None) -> dict[str, Any]:
    """Add a readings file to the store; naive times are read in ``tz`` (default: the site's zone)."""
    from ledger.store.readings import ReadingStore

    with db.read() as conn:
        the_site = repo.get_site(site_code, conn=conn)
        known = {c.code for c in _list(conn, site_code)}
    summary = ReadingStore(root).ingest(path, site_code, tz=tz or the_site.timezone)
    channels = sorted(getattr(summary, "channels", ()) or ())
    return {
        "summary": summary,
        "unmapped": [c for c in channels if c not in known],
        "timezone": tz or the_site.timezone,
    }


@dataclass(slots=True)
class ReviewResult:
    """A channel review with what the PDF and JSON need."""

    review: Any
    readings: Any
    channel: Channel
    history: SystemHistory
    refrigerant: str
    molar_mass_g_mol: float
    repairs: list[date]


def review(
    db: Database,
    root: Path,
    *,
    site_code: str,
    code: str,
    start: date | None,
    end: date | None,
) -> ReviewResult:
    """Review one channel over a window, store the episodes it found, and return the result."""
    import pandas as pd
    from sqlalchemy import delete, insert

    from ledger.domain.detector import ChannelConfig, review_channel
    from ledger.reference import load_reference
    from ledger.store.readings import ReadingStore
    from ledger.store.tables import detector_episode

    with db.read() as conn:
        channel = next((c for c in _list(conn, site_code) if c.code == code), None)
        if channel is None:
            raise NotFound(f"detector: {site_code}/{code!r} is not in the ledger (see `refledger detector list`)")
        history = repo.load_histories(conn=conn, system_id=channel.system_id)[0]
        others = [c.code for c in _list(conn, site_code) if c.code != code]
    zone = ZoneInfo(history.site.timezone)
    start_at = datetime.combine(start, time(), zone).astimezone(UTC) if start else None
    end_at = datetime.combine(end + timedelta(days=1), time(), zone).astimezone(UTC) if end else None
    store = ReadingStore(root)
    readings = store.load(site_code, code, start_at, end_at)
    if readings is None or len(readings) == 0:
        raise NotFound(
            f"detector: no readings for {site_code}/{code} in that window "
            "(import them with `refledger detector import`)"
        )
    other = (
        store.hourly_means(
            site_code, channels=[c for c in others if c in store.channels(site_code)], start=start_at, end=end_at
        )
        if others
        else {}
    )
    booking = book(history)
    repairs = [
        e.performed_on
        for e in booking.events
        if e.kind is EventKind.REPAIR and (end is None or e.performed_on <= end)
    ]
    night_start, night_end = channel.night_start, channel.night_end
    config = ChannelConfig(
        code,
        timezone=history.site.timezone,
        levels_ppm=channel.levels_ppm,
        night_start=time.fromisoformat(night_start),
        night_end=time.fromisoformat(night_end),
    )
    result = review_channel(
        readings, config, defrost_every_hours=history.system.defrost_every_hours, repairs=repairs, other_channels=other
    )
    reference = load_reference()
    state = booking.state(end or date.max)
    refrigerant = state.refrigerant or ""
    molar = float(reference.molar_mass_g_mol(refrigerant)) if refrigerant else float("nan")
    first = pd.Timestamp(readings["time"].iloc[0]).to_pydatetime()
    last = pd.Timestamp(readings["time"].iloc[-1]).to_pydatetime()
    now = repo.now_utc()
    with db.write() as conn:
        conn.execute(
            delete(detector_episode).where(
                detector_episode.c.channel_id == channel.id,
                detector_episode.c.start_at >= first,
                detector_episode.c.start_at <= last,
            )
        )
        rows = [
            {
                "channel_id": channel.id,
                "level": ep.level,
                "start_at": ep.start,
                "end_at": ep.end,
                "peak_ppm": float(ep.peak_ppm),
                "ppm_hours": float(ep.ppm_hours),
                "reviewed_at": now,
            }
            for ep in result.episodes
        ]
        if rows:
            conn.execute(insert(detector_episode), rows)
    return ReviewResult(result, readings, channel, history, refrigerant, molar, repairs)


def stored_episodes(
    conn: Any, system_ids: Sequence[int] | None, zones: dict[int, str]
) -> dict[int, list[StoredEpisode]]:
    """Episodes kept by earlier reviews, by system id, dated in each site's calendar.

    Args:
        conn: an open connection.
        system_ids: restrict to these systems (None: all).
        zones: system id -> IANA zone of its site.
    """
    from sqlalchemy import select

    from ledger.store.tables import detector_channel, detector_episode

    stmt = select(detector_episode, detector_channel.c.system_id, detector_channel.c.code).join(
        detector_channel, detector_channel.c.id == detector_episode.c.channel_id
    )
    if system_ids is not None:
        stmt = stmt.where(detector_channel.c.system_id.in_(list(system_ids)))
    found: dict[int, list[StoredEpisode]] = {}
    for r in conn.execute(stmt):
        start = r.start_at if r.start_at.tzinfo else r.start_at.replace(tzinfo=UTC)
        end = r.end_at if r.end_at.tzinfo else r.end_at.replace(tzinfo=UTC)
        local = start.astimezone(ZoneInfo(zones.get(r.system_id, "UTC"))).date()
        found.setdefault(r.system_id, []).append(StoredEpisode(r.code, r.level, start, end, local, r.peak_ppm))
    return found
