"""Detector evidence: each feature recovered from constructed readings with a known truth.

Synthetic readings are built here minute by minute; each test states the constructed truth
and the tolerance. Conversions are checked against published figures (named beside each
value) with molar masses from CoolProp.
"""

from __future__ import annotations

import json
import time as clock
from datetime import UTC, date, datetime, time, timedelta

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ledger.domain.detector import (
    DEFAULT_LEVELS_PPM,
    ChannelConfig,
    hourly_means,
    ppm_to_kg_per_m3,
    ppm_to_mg_per_m3,
    review_channel,
    theil_sen_slope,
)
from ledger.errors import InputError

BERLIN = "Europe/Berlin"


def minutes(start: str, count: int, tz: str = "UTC") -> pd.DatetimeIndex:
    """``count`` one-minute timestamps from ``start`` (wall clock in ``tz``), as UTC."""
    return pd.date_range(pd.Timestamp(start, tz=tz), periods=count, freq="min").tz_convert("UTC")


def frame(times: pd.DatetimeIndex, ppm: np.ndarray) -> pd.DataFrame:
    return pd.DataFrame({"time": times, "ppm": np.asarray(ppm, dtype=float)})


def noise(n: int, seed: int, sd: float = 1.0) -> np.ndarray:
    return np.random.default_rng(seed).normal(0.0, sd, n)


# --------------------------------------------------------------------------- conversions


def test_ppm_to_mg_per_m3_co2_published_example() -> None:
    coolprop = pytest.importorskip("CoolProp.CoolProp")
    m_co2 = coolprop.PropsSI("M", "CO2") * 1000  # g/mol, CoolProp
    # CO2 5 000 ppm ≈ 9 000 mg/m³ (reference-notes "Methods", 25 °C, 1 atm).
    assert ppm_to_mg_per_m3(5000, m_co2) == pytest.approx(9000, rel=0.005)


def test_ppm_to_kg_per_m3_r134a_imc_table_1103_1() -> None:
    coolprop = pytest.importorskip("CoolProp.CoolProp")
    m_r134a = coolprop.PropsSI("M", "R134a") * 1000  # g/mol, CoolProp
    # IMC Table 1103.1: R-134a 50 000 ppm = 0.21 kg/m³ (printed to two decimals).
    assert round(ppm_to_kg_per_m3(50_000, m_r134a), 2) == 0.21
    assert ppm_to_kg_per_m3(50_000, m_r134a) == pytest.approx(0.21, abs=0.005)


def test_conversion_is_vectorised_and_rejects_bad_molar_mass() -> None:
    out = ppm_to_mg_per_m3(np.array([0.0, 24.45]), 100.0)
    assert out.tolist() == [0.0, 100.0]  # 24.45 ppm of a 100 g/mol gas = 100 mg/m³ by the formula
    with pytest.raises(InputError):
        ppm_to_mg_per_m3(1.0, 0.0)


# --------------------------------------------------------------------------- config


def test_default_levels_are_the_documented_common_practice() -> None:
    # Common practice, no published source (reference-notes "Methods"; docs/detectors.md).
    assert DEFAULT_LEVELS_PPM == (25.0, 100.0, 400.0)
    assert ChannelConfig("A1", timezone="UTC").levels_ppm == (25.0, 100.0, 400.0)


@pytest.mark.parametrize(
    "kwargs",
    [
        {"levels_ppm": (100.0, 25.0)},
        {"levels_ppm": ()},
        {"levels_ppm": (-1.0,)},
        {"timezone": "Mars/Olympus"},
        {"night_start": time(6), "night_end": time(6)},
    ],
)
def test_channel_config_rejects_bad_settings(kwargs: dict) -> None:
    args = {"timezone": "UTC", **kwargs}
    with pytest.raises(InputError):
        ChannelConfig("A1", **args)


def test_naive_times_are_refused() -> None:
    df = pd.DataFrame({"time": pd.date_range("2025-01-01", periods=3, freq="min"), "ppm": 1.0})
    with pytest.raises(InputError, match="timezone-aware"):
        review_channel(df, ChannelConfig("A1", timezone="UTC"))


# --------------------------------------------------------------------------- episodes, gaps


def test_square_pulse_gives_nested_episodes_with_exact_figures() -> None:
    # Truth: 3 ppm, then 30 min at 150 ppm from 10:00 with 5 min at 450 ppm from 10:10.
    t = minutes("2025-01-01 00:00", 24 * 60)
    ppm = np.full(len(t), 3.0)
    ppm[600:630] = 150.0
    ppm[610:615] = 450.0
    review = review_channel(frame(t, ppm), ChannelConfig("A1", timezone="UTC"))
    by_level = {e.level: e for e in review.episodes}
    assert sorted(by_level) == [1, 2, 3]
    one, two, three = by_level[1], by_level[2], by_level[3]
    assert one.start == datetime(2025, 1, 1, 10, 0, tzinfo=UTC)
    assert one.end == datetime(2025, 1, 1, 10, 30, tzinfo=UTC)
    assert one.duration_hours == pytest.approx(0.5)
    assert one.peak_ppm == 450.0
    assert one.peak_at == datetime(2025, 1, 1, 10, 10, tzinfo=UTC)
    # ppm-hours above level 1: 25 min x 125 ppm + 5 min x 425 ppm, in hours.
    assert one.ppm_hours == pytest.approx((25 * 125 + 5 * 425) / 60)
    assert two.ppm_hours == pytest.approx((25 * 50 + 5 * 350) / 60)
    assert three.start == datetime(2025, 1, 1, 10, 10, tzinfo=UTC)
    assert three.duration_hours == pytest.approx(5 / 60)
    assert three.ppm_hours == pytest.approx(5 * 50 / 60)
    assert review.peak_ppm == 450.0
    assert review.gaps == ()


def test_a_gap_ends_an_episode_and_is_not_interpolated() -> None:
    # Truth: 150 ppm from 10:00 to 14:00 but no readings from 11:00 to 12:59.
    t = minutes("2025-01-01 00:00", 24 * 60)
    ppm = 3.0 + noise(len(t), 1, 0.5)
    ppm[600:840] = 150.0
    keep = np.ones(len(t), dtype=bool)
    keep[660:780] = False
    review = review_channel(frame(t[keep], ppm[keep]), ChannelConfig("A1", timezone="UTC"))
    level1 = review.episodes_at(1)
    assert [(e.start.hour, e.end.hour, e.end.minute) for e in level1] == [(10, 11, 0), (13, 14, 0)]
    assert [e.duration_hours for e in level1] == pytest.approx([1.0, 1.0])
    assert len(review.gaps) == 1
    assert review.gaps[0].start == datetime(2025, 1, 1, 10, 59, tzinfo=UTC)
    assert review.gaps[0].end == datetime(2025, 1, 1, 13, 0, tzinfo=UTC)
    assert review.sample_period_s == 60.0


def test_short_dropouts_below_the_gap_factor_do_not_split_an_episode() -> None:
    # Truth: one 2 h run at 80 ppm with every 10th reading missing (spacing <= 2 min < 3x).
    t = minutes("2025-01-01 00:00", 6 * 60)
    ppm = np.full(len(t), 2.0)
    ppm[60:180] = 80.0
    keep = np.arange(len(t)) % 10 != 5
    review = review_channel(frame(t[keep], ppm[keep]), ChannelConfig("A1", timezone="UTC"))
    assert len(review.episodes_at(1)) == 1
    assert review.gaps == ()


@settings(max_examples=40, deadline=None)
@given(
    st.lists(st.floats(min_value=0, max_value=600, allow_nan=False), min_size=1, max_size=300),
    st.sampled_from([1, 2]),
)
def test_episode_ppm_hours_add_up_to_the_excess_over_each_level(values: list, level: int) -> None:
    # Property: the episodes at a level hold all of the excess over that level, exactly once.
    t = minutes("2025-01-01", len(values))
    ppm = np.asarray(values)
    review = review_channel(
        frame(t, ppm), ChannelConfig("A1", timezone="UTC"), sample_period=timedelta(minutes=1)
    )
    level_ppm = review.levels_ppm[level - 1]
    expected = np.clip(ppm - level_ppm, 0, None).sum() / 60
    assert sum(e.ppm_hours for e in review.episodes_at(level)) == pytest.approx(expected)


# --------------------------------------------------------------------------- night share


def _night_ramp(times_utc: pd.DatetimeIndex, tz: str) -> np.ndarray:
    """3 ppm by day; each site-local night 22:00-06:00 rises within 15 min to 60 ppm."""
    local = times_utc.tz_convert(tz)
    hours = local.hour + local.minute / 60
    into_night = np.where(hours >= 22, hours - 22, np.where(hours < 6, hours + 2, -1.0))
    return np.where(into_night >= 0, 3.0 + 57.0 * np.minimum(into_night / 0.25, 1.0), 3.0)


def test_night_build_up_is_all_at_night_in_site_time_across_a_clock_change() -> None:
    # Truth: all excess over level 1 falls in the site-local night window, 20 days spanning
    # the change to summer time on 30 March 2025 (a window taken in UTC would hold 6/8-7/8).
    t = minutes("2025-03-20 00:00", 20 * 24 * 60, tz=BERLIN)
    ppm = _night_ramp(t, BERLIN) + noise(len(t), 2, 0.5)
    review = review_channel(frame(t, ppm), ChannelConfig("A1", timezone=BERLIN))
    assert review.night_share == pytest.approx(1.0, abs=0.005)
    in_utc = review_channel(frame(t, ppm), ChannelConfig("A1", timezone="UTC")).night_share
    assert 0.70 < in_utc < 0.85
    # The same build-up by day (shifted 12 h) has no share at night.
    shifted = frame(t + pd.Timedelta(hours=12), ppm)
    assert review_channel(shifted, ChannelConfig("A1", timezone=BERLIN)).night_share == (
        pytest.approx(0.0, abs=0.005)
    )


def test_night_window_may_be_set_without_wrapping_midnight() -> None:
    # Truth: a 1 h excess at 02:00-03:00 UTC every day; window 01:00-04:00 holds all of it.
    t = minutes("2025-01-01", 5 * 24 * 60)
    ppm = np.where(t.hour == 2, 50.0, 2.0)
    cfg = ChannelConfig("A1", timezone="UTC", night_start=time(1), night_end=time(4))
    assert review_channel(frame(t, ppm), cfg).night_share == pytest.approx(1.0)


def test_night_share_is_none_without_excess() -> None:
    t = minutes("2025-01-01", 2 * 24 * 60)
    review = review_channel(frame(t, 3 + noise(len(t), 3)), ChannelConfig("A1", timezone="UTC"))
    assert review.night_share is None
    assert review.episodes == ()


# --------------------------------------------------------------------------- cycle


def _six_hour_cycle(n: int, seed: int) -> np.ndarray:
    """4 ppm with noise and a 20-minute release to 60 ppm every 6 h (the constructed truth)."""
    m = np.arange(n)
    return 4.0 + noise(n, seed) + 56.0 * ((m % 360) < 20)


def test_fixed_six_hour_cycle_is_recovered_and_compared_with_defrost() -> None:
    t = minutes("2025-01-01", 14 * 24 * 60)
    df = frame(t, _six_hour_cycle(len(t), 4))
    cfg = ChannelConfig("A1", timezone="UTC")
    review = review_channel(df, cfg, defrost_every_hours=6.0)
    # Truth 6 h; tolerance a quarter hour (hourly means).
    assert review.cycle_hours == pytest.approx(6.0, abs=0.25)
    assert review.cycle_strength >= 0.5
    assert review.cycle_matches_defrost is True
    assert review_channel(df, cfg, defrost_every_hours=8.0).cycle_matches_defrost is False
    assert review_channel(df, cfg).cycle_matches_defrost is None


def test_one_large_episode_does_not_hide_the_cycle() -> None:
    # Truth: the 6 h cycle above plus one hour at 300 ppm on day 5.
    t = minutes("2025-01-01", 14 * 24 * 60)
    ppm = _six_hour_cycle(len(t), 4)
    ppm[5 * 1440 + 600 : 5 * 1440 + 660] = 300.0
    review = review_channel(frame(t, ppm), ChannelConfig("A1", timezone="UTC"))
    assert review.cycle_hours == pytest.approx(6.0, abs=0.25)


def test_cycle_of_nine_hours_is_not_reported_as_a_multiple() -> None:
    t = minutes("2025-01-01", 21 * 24 * 60)
    m = np.arange(len(t))
    ppm = 4.0 + noise(len(t), 5) + 50.0 * ((m % 540) < 30)  # truth: 9 h
    review = review_channel(frame(t, ppm), ChannelConfig("A1", timezone="UTC"))
    assert review.cycle_hours == pytest.approx(9.0, abs=0.25)


def test_no_cycle_stands_out_in_noise_or_a_steady_rise() -> None:
    t = minutes("2025-01-01", 14 * 24 * 60)
    cfg = ChannelConfig("A1", timezone="UTC")
    assert review_channel(frame(t, 5 + noise(len(t), 6)), cfg).cycle_hours is None
    rising = 5 + np.arange(len(t)) / 1000 + noise(len(t), 7, 0.3)
    review = review_channel(frame(t, rising), cfg, defrost_every_hours=6.0)
    assert review.cycle_hours is None
    assert review.cycle_matches_defrost is None


# --------------------------------------------------------------------------- trend


def test_linear_rise_of_daily_peaks_is_recovered_despite_outlier_days() -> None:
    # Truth: each day one hour at 30 + 2.5 x day ppm over a noisy 4 ppm base, 40 days; two
    # days carry a one-off 900 ppm spike (Theil-Sen ignores them).
    days = 40
    t = minutes("2025-01-01", days * 24 * 60)
    m = np.arange(len(t))
    day = m // 1440
    ppm = 4.0 + noise(len(t), 8, 0.5)
    in_hour = (m % 1440 >= 600) & (m % 1440 < 660)
    ppm = np.where(in_hour, 30.0 + 2.5 * day, ppm)
    ppm[(day == 7) & (m % 1440 == 100)] = 900.0
    ppm[(day == 30) & (m % 1440 == 100)] = 900.0
    review = review_channel(frame(t, ppm), ChannelConfig("A1", timezone="UTC"))
    assert review.trend_ppm_per_day == pytest.approx(2.5, abs=0.05)
    assert review.trend_days == days


def test_trend_needs_a_week_of_covered_days() -> None:
    t = minutes("2025-01-01", 5 * 24 * 60)
    review = review_channel(frame(t, 4 + noise(len(t), 9)), ChannelConfig("A1", timezone="UTC"))
    assert review.trend_ppm_per_day is None
    assert any("no trend" in n for n in review.notes)


def test_theil_sen_is_the_median_of_pairwise_slopes() -> None:
    # Truth: y = 2x + 1 with one wild point; 36 of the 45 pairwise slopes are exactly 2.
    x = np.arange(10.0)
    y = 2 * x + 1
    y[3] = 500.0
    assert theil_sen_slope(x, y) == 2.0
    assert theil_sen_slope(np.array([1.0]), np.array([1.0])) is None


# --------------------------------------------------------------------------- after repair


def test_return_above_level_one_ten_days_after_a_repair_is_a_finding() -> None:
    # Truth: leak readings until the repair on 3 March (site time), quiet for 9 days, then
    # above level 1 from 13 March 10:00 Berlin: 10 days after. A second repair on 20 March
    # is followed by quiet readings only.
    t = minutes("2025-02-25 00:00", 35 * 24 * 60, tz=BERLIN)
    local = t.tz_convert(BERLIN)
    ppm = 4.0 + noise(len(t), 10, 0.5)
    before = local < pd.Timestamp("2025-03-03 12:00", tz=BERLIN)
    back = (local >= pd.Timestamp("2025-03-13 10:00", tz=BERLIN)) & (
        local < pd.Timestamp("2025-03-20 09:00", tz=BERLIN)
    )
    ppm = np.where(before | back, 70.0, ppm)
    review = review_channel(
        frame(t, ppm),
        ChannelConfig("A1", timezone=BERLIN),
        repairs=[date(2025, 3, 20), date(2025, 3, 3)],
    )
    first, second = review.after_repair
    assert first.repair_on == date(2025, 3, 3)
    assert first.days_to_return == 10
    assert first.returned_at == datetime(2025, 3, 13, 9, 0, tzinfo=UTC)
    assert first.finding == (
        "readings rose above level 1 (25 ppm) 10 days after the repair of 2025-03-03; "
        "the follow-up check is questionable"
    )
    assert second.repair_on == date(2025, 3, 20)
    assert second.days_to_return is None and second.finding is None


# --------------------------------------------------------------------------- related channels


def test_channels_sharing_a_signal_are_related_and_an_independent_one_is_not() -> None:
    # Truth: A and B carry the same irregular releases (B at half strength) plus their own
    # noise; C has releases at other times.
    t = minutes("2025-01-01", 10 * 24 * 60)
    rng = np.random.default_rng(11)
    shared = np.zeros(len(t))
    for start in rng.integers(0, len(t) - 240, 25):
        shared[start : start + int(rng.integers(60, 240))] += rng.uniform(20, 120)
    own = np.zeros(len(t))
    for start in rng.integers(0, len(t) - 240, 25):
        own[start : start + 120] += 80
    a = frame(t, 3 + shared + noise(len(t), 12))
    b = frame(t, 5 + 0.5 * shared + noise(len(t), 13))
    c = frame(t, 3 + own + noise(len(t), 14))
    review = review_channel(
        a,
        ChannelConfig("A", timezone="UTC"),
        other_channels={"A": a, "B": b, "C": c},
    )
    assert [r.channel for r in review.related_channels] == ["B"]
    assert review.related_channels[0].correlation >= 0.9
    # Hourly means in place of the raw readings give the same answer.
    again = review_channel(
        a,
        ChannelConfig("A", timezone="UTC"),
        other_channels={"B": hourly_means(b), "C": hourly_means(c)},
    )
    assert again.related_channels[0].correlation == pytest.approx(
        review.related_channels[0].correlation, abs=1e-3
    )


def test_too_little_overlap_is_not_a_relation() -> None:
    t = minutes("2025-01-01", 24 * 60)  # 24 hours < 48 needed
    a = frame(t, 3 + np.arange(len(t)) % 300)
    review = review_channel(a, ChannelConfig("A", timezone="UTC"), other_channels={"B": a})
    assert review.related_channels == ()


# --------------------------------------------------------------------------- output, speed


def test_to_json_has_exactly_the_documented_keys_and_iso_times() -> None:
    t = minutes("2025-01-01", 3 * 24 * 60)
    ppm = 3 + noise(len(t), 15)
    ppm[100:160] = 120
    ppm = np.delete(ppm, np.s_[2000:2300])
    t = t.delete(np.s_[2000:2300])
    out = review_channel(
        frame(t, ppm), ChannelConfig("A1", timezone=BERLIN), repairs=[date(2025, 1, 1)]
    ).to_json()
    assert set(out) == {
        "channel", "window", "levels_ppm", "episodes", "night_share", "cycle_hours",
        "cycle_strength", "cycle_matches_defrost", "trend_ppm_per_day", "after_repair",
        "related_channels", "gaps",
    }  # fmt: skip
    assert set(out["window"]) == {"from", "to"}
    assert set(out["episodes"][0]) == {
        "start", "end", "peak_ppm", "level", "duration_hours", "ppm_hours"
    }  # fmt: skip
    assert set(out["after_repair"][0]) == {"repair_on", "days_to_return", "finding"}
    assert set(out["gaps"][0]) == {"start", "end"}
    assert datetime.fromisoformat(out["window"]["from"]) == datetime(2025, 1, 1, tzinfo=UTC)
    assert datetime.fromisoformat(out["episodes"][0]["start"]).tzinfo is not None
    json.dumps(out)  # plain data only


def test_empty_readings_give_an_empty_review() -> None:
    df = pd.DataFrame({"time": pd.Series([], dtype="datetime64[us, UTC]"), "ppm": []})
    review = review_channel(df, ChannelConfig("A1", timezone="UTC"), repairs=[date(2025, 1, 1)])
    assert review.reading_count == 0 and review.episodes == ()
    assert review.to_json()["window"] == {"from": None, "to": None}


def test_a_year_of_one_minute_readings_is_reviewed_in_well_under_a_second() -> None:
    t = minutes("2025-01-01", 525_600)
    m = np.arange(len(t))
    ppm = 4 + noise(len(t), 16) + 40.0 * ((m % 360) < 20) + 30.0 * ((m // 1440) % 50 == 7)
    df = frame(t, ppm)
    others = {"B": hourly_means(frame(t, ppm * 0.5 + noise(len(t), 17)))}
    cfg = ChannelConfig("A1", timezone=BERLIN)
    review_channel(df, cfg)  # warm-up (first use of the time zone, numpy code paths)
    start = clock.perf_counter()
    review = review_channel(
        df, cfg, defrost_every_hours=6.0, repairs=[date(2025, 6, 1)], other_channels=others
    )
    elapsed = clock.perf_counter() - start
    assert review.reading_count == 525_600
    assert review.cycle_hours == pytest.approx(6.0, abs=0.25)
    assert elapsed < 1.0, f"review took {elapsed:.2f} s"
