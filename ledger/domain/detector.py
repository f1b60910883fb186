"""Detector evidence: measured features of fixed refrigerant-detector readings.

A fixed detector logs a concentration in ppm per sampling channel, often once a minute. This
module turns one channel's readings into dated measurements that can sit beside a system's
checks and repairs: runs above each configured level, the share of the excess that falls at
night, a repeating period if one stands out, the trend of the daily peaks, what the readings
did after each recorded repair, and which other channels rise together with this one.

It presents measurements only. It does not name or classify leaks, and it is not a leak check.
Detectors used as safety devices fall under their own standards and local codes; local
regulation governs. Pure: no I/O and no clock. Everything is vectorised with numpy so that a
year of one-minute readings (525 600 rows) is reviewed in a small fraction of a second.

Definitions (see docs/detectors.md for the long form):

* **Sample period**: given by the caller, else the median spacing of the readings. Each
  reading stands for one sample period starting at its timestamp.
* **Gap**: two consecutive readings further apart than ``GAP_FACTOR`` sample periods. A gap
  ends any episode; nothing is interpolated across it.
* **Excess over level 1**: ``max(ppm - level_1, 0)``, in ppm; weighted by the sample period it
  gives ppm-hours.
* **Hourly mean**: the mean reading of each UTC clock hour that has readings (hours without
  readings are missing, not zero). Correlations between channels are computed on it
  (Pearson is blind to a constant baseline, so this equals working on the excess over a
  baseline); cycles on ``log(1 + hourly mean)``, so that one large episode does not hide a
  cycle of smaller releases.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import KW_ONLY, dataclass, field
from datetime import UTC, date, datetime, time, timedelta
from typing import Any
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np
import pandas as pd

from ledger.errors import InputError

# Common practice for HFC detectors, no published source (reference-notes "Methods": an
# early warning around 10-40 ppm, a call for a technician around 50-100 ppm, several hundred
# ppm for a large leak). Sites set their own levels; these are only the defaults.
DEFAULT_LEVELS_PPM: tuple[float, ...] = (25.0, 100.0, 400.0)

# Molar volume of an ideal gas at 25 °C and 1 atm, in litres per mole; the basis of the usual
# ppm <-> mg/m³ conversion (reference-notes "Methods"; the same basis as IMC Table 1103.1).
MOLAR_VOLUME_L_PER_MOL = 24.45

# Readings further apart than this many sample periods are a gap: loggers jitter by a few
# seconds and occasionally drop one sample, but three missing samples in a row is an outage.
GAP_FACTOR = 3.0

# Used only when a channel has a single reading and the caller gave no sample period: one
# minute is the usual logging interval of fixed detectors.
FALLBACK_SAMPLE_PERIOD = timedelta(minutes=1)

# Cycle search on the hourly means: lags from 2 h (lag 1 is always high for a smooth signal)
# up to one week, and at most a third of the record so that each lag has at least three
# repetitions behind it.
CYCLE_MIN_LAG_HOURS = 2
CYCLE_MAX_LAG_HOURS = 168
# A cycle "stands out" when the autocorrelation at its lag is at least this high ...
CYCLE_MIN_STRENGTH = 0.3
# ... and rises at least this much above the lowest autocorrelation at shorter lags (so a
# slowly decaying autocorrelation with a ripple is not reported as a cycle).
CYCLE_MIN_PROMINENCE = 0.15
# Among qualifying peaks the shortest lag whose autocorrelation is at least this fraction of
# the strongest one is reported, so a 6 h cycle is not reported as its 12 h or 24 h multiple.
CYCLE_FUNDAMENTAL_FRACTION = 0.8
# Pairs of hours needed behind one autocorrelation value.
CYCLE_MIN_PAIRS = 24

# A cycle matches the recorded defrost interval when within 10 % of it or half an hour,
# whichever is larger: hourly resolution cannot place a period more finely than that.
DEFROST_TOLERANCE_FRACTION = 0.10
DEFROST_TOLERANCE_HOURS = 0.5

# Daily peaks: a site-local day counts when at least half of its expected readings exist, and
# a trend needs at least a week of such days.
DAY_MIN_COVERAGE = 0.5
TREND_MIN_DAYS = 7

# Related channels: Pearson correlation of hourly means >= 0.7 (a conventional "strong"
# correlation) over at least 48 overlapping hours.
RELATED_MIN_CORRELATION = 0.7
RELATED_MIN_HOURS = 48

_NS_PER_S = 1_000_000_000
_NS_PER_HOUR = 3600 * _NS_PER_S
_NS_PER_DAY = 24 * _NS_PER_HOUR
_EPOCH_ORDINAL = date(1970, 1, 1).toordinal()

ChannelCode = str


@dataclass(frozen=True, slots=True)
class ChannelConfig:
    """How one detector channel is reviewed.

    Args:
        channel: the channel's code as stored (e.g. ``"A3"``).
        timezone: IANA zone of the site (for the night window, daily peaks and repair dates).
        levels_ppm: ascending alarm levels; level 1 is the first. Defaults are common practice
            with no published source (see ``DEFAULT_LEVELS_PPM``).
        night_start: start of the site-local night window.
        night_end: end of the night window; earlier than ``night_start`` means it wraps midnight.
    """

    channel: ChannelCode
    _: KW_ONLY
    timezone: str
    levels_ppm: tuple[float, ...] = DEFAULT_LEVELS_PPM
    night_start: time = time(22, 0)
    night_end: time = time(6, 0)

    def __post_init__(self) -> None:
        levels = tuple(float(v) for v in self.levels_ppm)
        if not levels:
            raise InputError("levels_ppm", self.levels_ppm, "needs at least one level")
        if any(not math.isfinite(v) or v < 0 for v in levels):
            raise InputError("levels_ppm", self.levels_ppm, "must be finite and not negative")
        if any(b <= a for a, b in zip(levels, levels[1:], strict=False)):
            raise InputError("levels_ppm", self.levels_ppm, "must be strictly ascending")
        object.__setattr__(self, "levels_ppm", levels)
        try:
            ZoneInfo(self.timezone)
        except (ZoneInfoNotFoundError, ValueError, TypeError) as exc:
            raise InputError("timezone", self.timezone, "is not a known IANA time zone") from exc
        if self.night_start == self.night_end:
            raise InputError("night_end", self.night_end, "must differ from night_start")


@dataclass(frozen=True, slots=True)
class Episode:
    """A contiguous run of readings above one level (ended by a reading at or below it or a gap).

    ``end`` is the last reading above the level plus one sample period, so
    ``duration_hours == (end - start)`` in hours. ``ppm_hours`` is the sum of
    ``ppm - level_ppm`` over the run, each reading weighted by the sample period.
    """

    level: int  # 1-based index into the configured levels
    level_ppm: float
    start: datetime  # aware UTC: time of the first reading above the level
    end: datetime  # aware UTC
    duration_hours: float
    peak_ppm: float
    peak_at: datetime
    ppm_hours: float


@dataclass(frozen=True, slots=True)
class Gap:
    """Readings missing between two timestamps (last reading before, first reading after)."""

    start: datetime
    end: datetime


@dataclass(frozen=True, slots=True)
class AfterRepair:
    """What the readings did after one recorded repair.

    The search starts at the site-local midnight after the repair day (the repair's time of
    day is not known) and stops at the next recorded repair day.
    """

    repair_on: date
    days_to_return: int | None  # site-local days from the repair to the first reading above L1
    returned_at: datetime | None  # that reading's time (aware UTC)
    finding: str | None  # set when readings rose above level 1 again


@dataclass(frozen=True, slots=True)
class RelatedChannel:
    """Another channel whose hourly means correlate with this one's."""

    channel: ChannelCode
    correlation: float  # Pearson coefficient over the overlapping hours
    overlap_hours: int


@dataclass(frozen=True, slots=True)
class Review:
    """Measured features of one channel's readings; ``to_json`` gives the stable dict form."""

    channel: ChannelCode
    timezone: str
    levels_ppm: tuple[float, ...]
    window_from: datetime | None  # first reading (aware UTC)
    window_to: datetime | None  # last reading (aware UTC)
    reading_count: int
    sample_period_s: float | None
    peak_ppm: float | None
    peak_at: datetime | None
    episodes: tuple[Episode, ...]
    night_share: float | None  # share of the ppm-hours above level 1 that fall at night
    cycle_hours: float | None
    cycle_strength: float | None  # autocorrelation of the hourly means at cycle_hours
    cycle_matches_defrost: bool | None
    defrost_every_hours: float | None
    trend_ppm_per_day: float | None  # Theil-Sen slope of daily peaks
    trend_days: int  # qualifying days behind the trend
    after_repair: tuple[AfterRepair, ...]
    related_channels: tuple[RelatedChannel, ...]
    gaps: tuple[Gap, ...]
    notes: tuple[str, ...] = field(default=())  # why a feature is None, in plain words
    night_start: time = time(22, 0)  # the night window used for night_share (site-local)
    night_end: time = time(6, 0)

    def episodes_at(self, level: int) -> tuple[Episode, ...]:
        """Episodes above the given 1-based level."""
        return tuple(e for e in self.episodes if e.level == level)

    def to_json(self) -> dict[str, Any]:
        """The review as JSON-ready plain data with ISO 8601 timestamps."""
        return {
            "channel": self.channel,
            "window": {"from": _iso(self.window_from), "to": _iso(self.window_to)},
            "levels_ppm": list(self.levels_ppm),
            "episodes": [
                {
                    "start": _iso(e.start),
                    "end": _iso(e.end),
                    "peak_ppm": e.peak_ppm,
                    "level": e.level,
                    "duration_hours": e.duration_hours,
                    "ppm_hours": e.ppm_hours,
                }
                for e in self.episodes
            ],
            "night_share": self.night_share,
            "cycle_hours": self.cycle_hours,
            "cycle_strength": self.cycle_strength,
            "cycle_matches_defrost": self.cycle_matches_defrost,
            "trend_ppm_per_day": self.trend_ppm_per_day,
            "after_repair": [
                {
                    "repair_on": a.repair_on.isoformat(),
                    "days_to_return": a.days_to_return,
                    "finding": a.finding,
                }
                for a in self.after_repair
            ],
            "related_channels": [
                {"channel": r.channel, "correlation": r.correlation} for r in self.related_channels
            ],
            "gaps": [{"start": _iso(g.start), "end": _iso(g.end)} for g in self.gaps],
        }


# --------------------------------------------------------------------------- conversions


def ppm_to_mg_per_m3(ppm: Any, molar_mass_g_mol: float) -> Any:
    """Convert a volume fraction in ppm to mg/m³ at 25 °C and 1 atm.

    mg/m³ = ppm × M / 24.45 (reference-notes "Methods"). For a blend pass its vapour molar
    mass, M = 1 / Σ(wᵢ / Mᵢ) (e.g. ``Reference.molar_mass_g_mol(designation)``).

    Args:
        ppm: a number or a numpy array of ppm values.
        molar_mass_g_mol: molar mass of the gas in g/mol.
    Returns:
        The concentration in mg/m³ (same shape as ``ppm``).
    """
    if not (molar_mass_g_mol > 0 and math.isfinite(molar_mass_g_mol)):
        raise InputError("molar_mass_g_mol", molar_mass_g_mol, "must be a positive number")
    return ppm * (molar_mass_g_mol / MOLAR_VOLUME_L_PER_MOL)


def ppm_to_kg_per_m3(ppm: Any, molar_mass_g_mol: float) -> Any:
    """Convert ppm to kg/m³ at 25 °C and 1 atm (``ppm_to_mg_per_m3`` / 10⁶)."""
    return ppm_to_mg_per_m3(ppm, molar_mass_g_mol) / 1e6


# --------------------------------------------------------------------------- helpers


def _iso(value: datetime | None) -> str | None:
    return None if value is None else value.isoformat()


def _to_datetime(ns: int) -> datetime:
    return datetime(1970, 1, 1, tzinfo=UTC) + timedelta(microseconds=int(ns) // 1000)


def _to_datetimes(ns: np.ndarray) -> list[datetime]:
    return [d.replace(tzinfo=UTC) for d in (ns // 1000).astype("datetime64[us]").tolist()]


def _prepare(readings: pd.DataFrame, name: str) -> tuple[np.ndarray, np.ndarray]:
    """UTC epoch nanoseconds and ppm as numpy arrays, sorted, without NaN or repeated times."""
    if "time" not in readings.columns or "ppm" not in readings.columns:
        raise InputError(name, list(readings.columns), "needs columns 'time' and 'ppm'")
    col = readings["time"]
    if not isinstance(col.dtype, pd.DatetimeTZDtype):
        raise InputError(f"{name}.time", str(col.dtype), "must be timezone-aware datetimes (UTC)")
    arr = col.array
    t = (arr if arr.unit == "ns" else arr.as_unit("ns")).asi8
    ppm = readings["ppm"].to_numpy(dtype="float64", na_value=np.nan)
    keep = np.isfinite(ppm) & (t != np.iinfo(np.int64).min)
    if not keep.all():
        t, ppm = t[keep], ppm[keep]
    if len(t) > 1:
        d = np.diff(t)
        if (d < 0).any():
            order = np.argsort(t, kind="stable")
            t, ppm = t[order], ppm[order]
            d = np.diff(t)
        if (d == 0).any():
            first = np.concatenate(([True], d != 0))
            t, ppm = t[first], ppm[first]
    return t, ppm


def hourly_means(readings: pd.DataFrame) -> pd.DataFrame:
    """Mean ppm per UTC clock hour that has readings.

    Passing these frames as ``other_channels`` to ``review_channel`` gives the same related
    channels as passing the raw readings, and is much cheaper when many channels are
    reviewed against each other.

    Args:
        readings: columns ``time`` (aware) and ``ppm``.
    Returns:
        Columns ``time`` (start of the hour, aware UTC) and ``ppm`` (hourly mean).
    """
    t, ppm = _prepare(readings, "readings")
    hours, means = _hourly(t, ppm)
    return pd.DataFrame({"time": pd.to_datetime(hours * _NS_PER_HOUR, utc=True), "ppm": means})


def _hourly(t: np.ndarray, ppm: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Absolute UTC hour numbers that have readings, and their mean ppm (t sorted)."""
    if len(t) == 0:
        return np.empty(0, dtype=np.int64), np.empty(0)
    hour = t // _NS_PER_HOUR
    rel = hour - hour[0]
    counts = np.bincount(rel)
    sums = np.bincount(rel, weights=ppm)
    have = counts > 0
    return np.flatnonzero(have) + hour[0], sums[have] / counts[have]


def _local_ns(t: np.ndarray, tz: str) -> np.ndarray:
    """Site-local wall-clock time as epoch-like nanoseconds (for time of day and dates).

    The UTC offset is looked up once per UTC hour and applied to every reading in it; only
    the readings of an hour in which the offset changes are converted one by one.
    """
    if tz in ("UTC", "Etc/UTC") or len(t) == 0:
        return t
    h0 = int(t[0] // _NS_PER_HOUR)
    h1 = int(t[-1] // _NS_PER_HOUR)
    grid = np.arange(h0, h1 + 2, dtype=np.int64) * _NS_PER_HOUR
    offsets = _wall_clock(grid, tz) - grid
    k = t // _NS_PER_HOUR - h0
    local = t + offsets[k]
    changing = offsets[1:] != offsets[:-1]
    if changing.any():
        inside = changing[k]
        local[inside] = _wall_clock(t[inside], tz)
    return local


def _wall_clock(t: np.ndarray, tz: str) -> np.ndarray:
    idx = pd.DatetimeIndex(t.view("datetime64[ns]")).tz_localize("UTC").tz_convert(tz)
    return idx.tz_localize(None).asi8


# --------------------------------------------------------------------------- features


def _gaps(t: np.ndarray, period_ns: float) -> np.ndarray:
    """Boolean per reading: a gap lies between this reading and the previous one."""
    gap_before = np.zeros(len(t), dtype=bool)
    if len(t) > 1:
        gap_before[1:] = np.diff(t) > GAP_FACTOR * period_ns
    return gap_before


def _episodes(
    t: np.ndarray,
    ppm: np.ndarray,
    levels: tuple[float, ...],
    gap_before: np.ndarray,
    period_ns: float,
    above1: np.ndarray,
) -> list[Episode]:
    """Runs above each level; works on the (usually few) readings above level 1 only.

    ``above1`` holds the indices of the readings above level 1. For a higher level the
    readings above it are a subset; a run is a stretch of consecutive indices with no gap
    before any of its readings after the first.
    """
    parts: list[tuple[np.ndarray, ...]] = []
    idx = above1
    for level_no, level in enumerate(levels, start=1):
        idx = idx[ppm[idx] > level]
        if len(idx) == 0:
            break
        values = ppm[idx]
        new_run = np.empty(len(idx), dtype=bool)
        new_run[0] = True
        new_run[1:] = (np.diff(idx) != 1) | gap_before[idx[1:]]
        starts = np.flatnonzero(new_run)
        ends = np.concatenate((starts[1:], [len(idx)])) - 1
        peaks = np.maximum.reduceat(values, starts)
        excess = np.add.reduceat(values - level, starts)
        # The first reading of each run that reaches the run's peak.
        run_id = np.cumsum(new_run) - 1
        candidates = np.flatnonzero(values == peaks[run_id])
        peak_pos = candidates[np.unique(run_id[candidates], return_index=True)[1]]
        parts.append(
            (
                np.full(len(starts), level_no),
                t[idx[starts]],
                t[idx[ends]] + int(round(period_ns)),
                peaks,
                t[idx[peak_pos]],
                excess * (period_ns / _NS_PER_HOUR),
            )
        )
    if not parts:
        return []
    number, start_ns, end_ns, peaks, peak_ns, ppm_hours = (
        np.concatenate(c) for c in zip(*parts, strict=True)
    )
    order = np.lexsort((number, start_ns))
    number, start_ns, end_ns, peaks, peak_ns, ppm_hours = (
        a[order] for a in (number, start_ns, end_ns, peaks, peak_ns, ppm_hours)
    )
    durations = (end_ns - start_ns) / _NS_PER_HOUR
    level_ppm = np.asarray(levels)[number - 1]
    return [
        Episode(*row)
        for row in zip(
            number.tolist(),
            level_ppm.tolist(),
            _to_datetimes(start_ns),
            _to_datetimes(end_ns),
            durations.tolist(),
            peaks.tolist(),
            _to_datetimes(peak_ns),
            ppm_hours.tolist(),
            strict=True,
        )
    ]


def _night_share(
    ppm: np.ndarray, local: np.ndarray, above1: np.ndarray, level1: float, config: ChannelConfig
) -> float | None:
    excess = ppm[above1] - level1
    total = float(excess.sum())
    if total <= 0.0:
        return None
    tod = local[above1] % _NS_PER_DAY
    ns = config.night_start
    ne = config.night_end
    start = ((ns.hour * 60 + ns.minute) * 60 + ns.second) * _NS_PER_S
    end = ((ne.hour * 60 + ne.minute) * 60 + ne.second) * _NS_PER_S
    if start < end:
        night = (tod >= start) & (tod < end)
    else:
        night = (tod >= start) | (tod < end)
    return float(excess[night].sum() / total)


def _cycle(hours: np.ndarray, means: np.ndarray) -> tuple[float | None, float | None]:
    """Dominant repetition period (h) and its autocorrelation, or (None, None)."""
    if len(hours) < 2:
        return None, None
    n = int(hours[-1] - hours[0] + 1)
    max_lag = min(CYCLE_MAX_LAG_HOURS, n // 3)
    if max_lag < CYCLE_MIN_LAG_HOURS + 1:
        return None, None
    pos = hours - hours[0]
    # log(1 + ppm): one large episode would otherwise dominate the variance and hide a cycle
    # of smaller releases (concentrations spread roughly log-normally).
    values = np.log1p(np.clip(means, 0.0, None))
    if float(np.ptp(values)) == 0.0:
        return None, None
    slope, intercept = np.polyfit(pos.astype(float), values, 1)
    resid = values - (slope * pos + intercept)
    var = float(np.mean(resid * resid))
    if not var > 1e-9:
        return None, None
    x = np.zeros(n)
    m = np.zeros(n)
    x[pos] = resid
    m[pos] = 1.0
    nfft = 1 << int(math.ceil(math.log2(2 * n)))
    fx = np.fft.rfft(x, nfft)
    fm = np.fft.rfft(m, nfft)
    num = np.fft.irfft(fx * np.conj(fx), nfft)[: max_lag + 2]
    cnt = np.rint(np.fft.irfft(fm * np.conj(fm), nfft)[: max_lag + 2])
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.where(cnt >= CYCLE_MIN_PAIRS, num / np.maximum(cnt, 1) / var, np.nan)
    best_r = -np.inf
    candidates: list[tuple[int, float]] = []
    for k in range(CYCLE_MIN_LAG_HOURS, max_lag + 1):
        rk, before, after = r[k], r[k - 1], r[k + 1]
        if not np.isfinite(rk) or not np.isfinite(before):
            continue
        if not (rk > before and (not np.isfinite(after) or rk >= after)):
            continue
        earlier = r[1:k]
        trough = float(np.nanmin(earlier)) if np.isfinite(earlier).any() else rk
        if rk >= CYCLE_MIN_STRENGTH and rk - trough >= CYCLE_MIN_PROMINENCE:
            candidates.append((k, float(rk)))
            best_r = max(best_r, float(rk))
    if not candidates:
        return None, None
    k, rk = next((k, rk) for k, rk in candidates if rk >= CYCLE_FUNDAMENTAL_FRACTION * best_r)
    # Parabolic interpolation between neighbouring lags places the period between hours.
    a, b, c = r[k - 1], r[k], r[k + 1]
    shift = 0.0
    if np.isfinite(c):
        denom = a - 2 * b + c
        if denom < 0:
            shift = float(np.clip(0.5 * (a - c) / denom, -0.5, 0.5))
    return round(k + shift, 2), round(min(rk, 1.0), 3)


def _matches_defrost(cycle_hours: float | None, defrost_every_hours: float | None) -> bool | None:
    if cycle_hours is None or defrost_every_hours is None:
        return None
    tolerance = max(DEFROST_TOLERANCE_HOURS, DEFROST_TOLERANCE_FRACTION * defrost_every_hours)
    return abs(cycle_hours - defrost_every_hours) <= tolerance


def theil_sen_slope(x: np.ndarray, y: np.ndarray) -> float | None:
    """Theil-Sen slope: the median of the slopes between all pairs of points with distinct x.

    Fine for a few thousand points (memory grows with the square of the count).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if len(x) < 2:
        return None
    i, j = np.triu_indices(len(x), 1)
    dx = x[j] - x[i]
    ok = dx != 0
    if not ok.any():
        return None
    return float(np.median((y[j][ok] - y[i][ok]) / dx[ok]))


def _daily_peaks(
    local: np.ndarray, ppm: np.ndarray, period_ns: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Site-local day numbers, peak ppm and reading counts per day with readings."""
    day = local // _NS_PER_DAY
    if len(day) > 1 and (np.diff(day) < 0).any():
        # Only a zone that changes clock at midnight can step back a day; fall back to sorting.
        order = np.argsort(day, kind="stable")
        day, ppm = day[order], ppm[order]
    bounds = np.flatnonzero(np.diff(day)) + 1
    starts = np.concatenate(([0], bounds))
    peaks = np.maximum.reduceat(ppm, starts)
    counts = np.diff(np.concatenate((starts, [len(day)])))
    return day[starts], peaks, counts


def _after_repair(
    repairs: Sequence[date], t: np.ndarray, local: np.ndarray, above_idx: np.ndarray, level1: float
) -> list[AfterRepair]:
    out: list[AfterRepair] = []
    ordered = sorted(set(repairs))
    local_above = local[above_idx]
    for pos, repaired in enumerate(ordered):
        repair_day = repaired.toordinal() - _EPOCH_ORDINAL
        lo = (repair_day + 1) * _NS_PER_DAY
        hi = (
            (ordered[pos + 1].toordinal() - _EPOCH_ORDINAL) * _NS_PER_DAY
            if pos + 1 < len(ordered)
            else np.iinfo(np.int64).max
        )
        hits = above_idx[(local_above >= lo) & (local_above < hi)]
        if len(hits) == 0:
            out.append(AfterRepair(repaired, None, None, None))
            continue
        first = int(hits[0])
        days = int(local[first] // _NS_PER_DAY) - repair_day
        unit = "day" if days == 1 else "days"
        finding = (
            f"readings rose above level 1 ({level1:g} ppm) {days} {unit} after the repair of "
            f"{repaired.isoformat()}; the follow-up check is questionable"
        )
        out.append(AfterRepair(repaired, days, _to_datetime(t[first]), finding))
    return out


def _related(
    hours: np.ndarray, means: np.ndarray, others: Mapping[str, pd.DataFrame] | None, own: str
) -> list[RelatedChannel]:
    if not others or len(hours) == 0:
        return []
    n = int(hours[-1] - hours[0] + 1)
    mine = np.full(n, np.nan)
    mine[hours - hours[0]] = means
    out: list[RelatedChannel] = []
    for name, frame in others.items():
        if name == own:
            continue
        ot, oppm = _prepare(frame, f"other_channels[{name!r}]")
        if (ot % _NS_PER_HOUR == 0).all():
            # Already one value per hour start (e.g. from hourly_means): its own mean.
            oh, om = ot // _NS_PER_HOUR, oppm
        else:
            oh, om = _hourly(ot, oppm)
        rel = oh - hours[0]
        inside = (rel >= 0) & (rel < n)
        rel, om = rel[inside], om[inside]
        a = mine[rel]
        both = np.isfinite(a)
        if both.sum() < RELATED_MIN_HOURS:
            continue
        a, b = a[both], om[both]
        a = a - a.mean()
        b = b - b.mean()
        denom = math.sqrt(float(a @ a) * float(b @ b))
        if denom <= 0:
            continue
        r = float(a @ b) / denom
        if r >= RELATED_MIN_CORRELATION:
            out.append(RelatedChannel(name, round(r, 3), int(both.sum())))
    out.sort(key=lambda rc: -rc.correlation)
    return out


# --------------------------------------------------------------------------- entry point


def review_channel(
    readings: pd.DataFrame,
    config: ChannelConfig,
    *,
    defrost_every_hours: float | None = None,
    repairs: Sequence[date] = (),
    other_channels: Mapping[str, pd.DataFrame] | None = None,
    sample_period: timedelta | None = None,
) -> Review:
    """Measure one channel's readings.

    Args:
        readings: columns ``time`` (aware datetimes; converted to UTC) and ``ppm``. Rows with a
            missing value are ignored; repeated timestamps keep the first reading.
        config: the channel's levels, night window and site time zone.
        defrost_every_hours: the system's recorded defrost interval, if any.
        repairs: site-local dates of recorded repairs on the system the channel watches.
        other_channels: other channels' readings (or their ``hourly_means``) by channel code,
            to find channels that rise together with this one.
        sample_period: the logging interval; by default the median spacing of the readings.
    Returns:
        A ``Review`` of measurements; features that cannot be measured are ``None`` and
        ``notes`` says why.
    """
    t, ppm = _prepare(readings, "readings")
    levels = config.levels_ppm
    notes: list[str] = []
    if len(t) == 0:
        return Review(
            channel=config.channel,
            timezone=config.timezone,
            levels_ppm=levels,
            window_from=None,
            window_to=None,
            reading_count=0,
            sample_period_s=sample_period.total_seconds() if sample_period else None,
            peak_ppm=None,
            peak_at=None,
            episodes=(),
            night_share=None,
            cycle_hours=None,
            cycle_strength=None,
            cycle_matches_defrost=None,
            defrost_every_hours=defrost_every_hours,
            trend_ppm_per_day=None,
            trend_days=0,
            after_repair=tuple(AfterRepair(r, None, None, None) for r in sorted(set(repairs))),
            related_channels=(),
            gaps=(),
            notes=("no readings",),
            night_start=config.night_start,
            night_end=config.night_end,
        )
    if sample_period is not None:
        period_ns = sample_period.total_seconds() * _NS_PER_S
        if period_ns <= 0:
            raise InputError("sample_period", sample_period, "must be positive")
    elif len(t) > 1:
        period_ns = float(np.median(np.diff(t)))
    else:
        period_ns = FALLBACK_SAMPLE_PERIOD.total_seconds() * _NS_PER_S

    gap_before = _gaps(t, period_ns)
    gap_idx = np.flatnonzero(gap_before)
    gaps = tuple(
        Gap(s, e)
        for s, e in zip(_to_datetimes(t[gap_idx - 1]), _to_datetimes(t[gap_idx]), strict=True)
    )
    above1 = np.flatnonzero(ppm > levels[0])
    episodes = _episodes(t, ppm, levels, gap_before, period_ns, above1)
    local = _local_ns(t, config.timezone)

    night_share = _night_share(ppm, local, above1, levels[0], config)
    if night_share is None:
        notes.append("no readings above level 1: night share not defined")

    hours, means = _hourly(t, ppm)
    cycle_hours, cycle_strength = _cycle(hours, means)
    if cycle_hours is None:
        notes.append("no repeating period stands out in the hourly means")

    days, peaks, counts = _daily_peaks(local, ppm, period_ns)
    expected = _NS_PER_DAY / period_ns
    full = counts >= DAY_MIN_COVERAGE * expected
    trend = None
    if int(full.sum()) >= TREND_MIN_DAYS:
        trend = theil_sen_slope(days[full], peaks[full])
    else:
        notes.append(f"fewer than {TREND_MIN_DAYS} days with enough readings: no trend")

    peak_pos = int(np.argmax(ppm))
    return Review(
        channel=config.channel,
        timezone=config.timezone,
        levels_ppm=levels,
        window_from=_to_datetime(t[0]),
        window_to=_to_datetime(t[-1]),
        reading_count=len(t),
        sample_period_s=period_ns / _NS_PER_S,
        peak_ppm=float(ppm[peak_pos]),
        peak_at=_to_datetime(t[peak_pos]),
        episodes=tuple(episodes),
        night_share=None if night_share is None else round(night_share, 4),
        cycle_hours=cycle_hours,
        cycle_strength=cycle_strength,
        cycle_matches_defrost=_matches_defrost(cycle_hours, defrost_every_hours),
        defrost_every_hours=defrost_every_hours,
        trend_ppm_per_day=None if trend is None else round(trend, 4),
        trend_days=int(full.sum()),
        after_repair=tuple(_after_repair(repairs, t, local, above1, levels[0])),
        related_channels=tuple(_related(hours, means, other_channels, config.channel)),
        gaps=gaps,
        notes=tuple(notes),
        night_start=config.night_start,
        night_end=config.night_end,
    )
