"""The detector review as a PDF: key figures, a ppm trace, a day-by-hour map, the episodes.

Receives plain data (a ``Review`` and the readings it was computed from) and writes one file.
reportlab and matplotlib are imported inside ``render_review_pdf``; charts are drawn with
matplotlib's Agg canvas (no pyplot state, no display needed).
"""

from __future__ import annotations

import io
from collections.abc import Sequence
from datetime import date, datetime
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from ledger.domain.detector import Review, ppm_to_mg_per_m3
from ledger.exports.common import ACCENT, ACCENT_LIGHT, CAUTION, HEADER_FILL, INK, MUTED, RULE

# Printed on every detector review, after the caller's caution.
DETECTOR_CAUTION = (
    "These are measurements of the readings as logged; they are not a leak check and do not "
    "replace one, and they do not say what caused a reading. Detectors used as safety devices "
    "(for flammable or toxic refrigerants, or for occupancy limits) fall under their own "
    "standards and local codes, which this review does not assess; local regulation governs. "
    "Default alarm levels (25 / 100 / 400 ppm) are common practice with no published source; "
    "the site's own settings apply."
)

# The episode table lists at most this many rows; the JSON export holds them all.
MAX_EPISODE_ROWS = 200
# The trace is drawn from at most this many time bins (minimum and maximum of each), which
# keeps every peak visible while a year of one-minute readings stays a small image.
TRACE_BINS = 1500
# Lines of the three first levels; further levels reuse the last style.
LEVEL_COLOURS = ("#8a6d3b", "#a0522d", "#7a1f1f")


def _local(dt: datetime | None, tz: ZoneInfo) -> str:
    if dt is None:
        return "-"
    return dt.astimezone(tz).strftime("%Y-%m-%d %H:%M")


def _num(value: float | None, places: int = 1) -> str:
    if value is None:
        return "-"
    return f"{value:,.{places}f}"


def _key_figures(
    review: Review, refrigerant: str, molar_mass_g_mol: float, tz: ZoneInfo
) -> list[tuple[str, str]]:
    rows: list[tuple[str, str]] = []
    if review.peak_ppm is not None:
        mg = ppm_to_mg_per_m3(review.peak_ppm, molar_mass_g_mol)
        rows.append(
            (
                "Peak reading",
                f"{_num(review.peak_ppm)} ppm = {_num(mg, 0)} mg/m³ of {refrigerant} "
                f"(M = {molar_mass_g_mol:.2f} g/mol, 25 °C, 1 atm) at "
                f"{_local(review.peak_at, tz)}",
            )
        )
    else:
        rows.append(("Peak reading", "no readings"))
    counts = []
    for number, level in enumerate(review.levels_ppm, start=1):
        n = sum(1 for e in review.episodes if e.level == number)
        hours = sum(e.duration_hours for e in review.episodes if e.level == number)
        counts.append(f"level {number} ({level:g} ppm): {n} ({_num(hours)} h)")
    rows.append(("Episodes above each level", "; ".join(counts)))
    window = f"{review.night_start:%H:%M}-{review.night_end:%H:%M}"
    if review.night_share is None:
        rows.append(("Night share", "no readings above level 1"))
    else:
        rows.append(
            (
                "Night share",
                f"{review.night_share * 100:.0f} % of the ppm-hours above level 1 fell between "
                f"{window} site time",
            )
        )
    if review.cycle_hours is None:
        rows.append(("Repeating period", "none stands out in the hourly means"))
    else:
        text = (
            f"{review.cycle_hours:.1f} h (autocorrelation {review.cycle_strength:.2f} of the "
            "hourly means)"
        )
        if review.cycle_matches_defrost is not None and review.defrost_every_hours is not None:
            verb = "matches" if review.cycle_matches_defrost else "does not match"
            text += f"; {verb} the recorded defrost interval of {review.defrost_every_hours:g} h"
        rows.append(("Repeating period", text))
    if review.trend_ppm_per_day is None:
        rows.append(("Trend of daily peaks", "not enough days"))
    else:
        rows.append(
            (
                "Trend of daily peaks",
                f"{review.trend_ppm_per_day:+.2f} ppm per day (Theil-Sen slope over "
                f"{review.trend_days} days)",
            )
        )
    if not review.after_repair:
        rows.append(("After repairs", "no repairs recorded"))
    for a in review.after_repair:
        if a.finding:
            text = a.finding
        elif review.window_to is not None and a.repair_on < review.window_to.date():
            text = f"no reading above level 1 after the repair of {a.repair_on.isoformat()}"
        else:
            text = f"no readings after the repair of {a.repair_on.isoformat()}"
        rows.append(("After repair", text))
    if review.related_channels:
        rows.append(
            (
                "Rising together",
                ", ".join(
                    f"{r.channel} (r = {r.correlation:.2f})" for r in review.related_channels
                ),
            )
        )
    else:
        rows.append(("Rising together", "no other channel correlates (r >= 0.7)"))
    gap_hours = sum((g.end - g.start).total_seconds() for g in review.gaps) / 3600
    rows.append(
        (
            "Readings",
            f"{review.reading_count:,} readings, every {_num((review.sample_period_s or 0) / 60)}"
            f" min; {len(review.gaps)} gap(s) totalling {_num(gap_hours)} h (not interpolated)",
        )
    )
    return rows


def _trace_png(
    readings: pd.DataFrame, review: Review, repairs: Sequence[date], tz: ZoneInfo
) -> bytes:
    from matplotlib.figure import Figure

    t = readings["time"].array.as_unit("ns").asi8 if len(readings) else np.empty(0, np.int64)
    ppm = readings["ppm"].to_numpy(dtype=float) if len(readings) else np.empty(0)
    order = np.argsort(t, kind="stable")
    t, ppm = t[order], ppm[order]
    fig = Figure(figsize=(7.2, 2.8), dpi=150)
    ax = fig.add_subplot(1, 1, 1)
    if len(t):
        if len(t) > 4 * TRACE_BINS:
            # Minimum and maximum of each time bin, in time order, so no peak is lost.
            edges = np.linspace(t[0], t[-1] + 1, TRACE_BINS + 1)
            bins = np.searchsorted(edges, t, side="right") - 1
            starts = np.flatnonzero(np.diff(np.concatenate(([-1], bins))))
            lo = np.minimum.reduceat(ppm, starts)
            hi = np.maximum.reduceat(ppm, starts)
            x = np.repeat(t[starts], 2)
            y = np.column_stack((lo, hi)).ravel()
        else:
            x, y = t, ppm
        # Break the line at gaps instead of drawing across them.
        period = (review.sample_period_s or 60) * 1e9
        breaks = np.flatnonzero(np.diff(x) > 3 * max(period, (x[-1] - x[0]) / TRACE_BINS))
        xs = pd.to_datetime(x, utc=True).tz_convert(tz).tz_localize(None).to_numpy()
        yf = y.astype(float)
        if len(breaks):
            xs = np.insert(xs, breaks + 1, xs[breaks])
            yf = np.insert(yf, breaks + 1, np.nan)
        ax.plot(xs, yf, color=ACCENT, linewidth=0.6)
    # Levels up to the first one the readings did not reach: higher lines would only flatten
    # the trace (the key figures list every level).
    peak = review.peak_ppm if review.peak_ppm is not None else 0.0
    for number, level in enumerate(review.levels_ppm, start=1):
        if number > 1 and review.levels_ppm[number - 2] >= peak:
            break
        colour = LEVEL_COLOURS[min(number, len(LEVEL_COLOURS)) - 1]
        ax.axhline(level, color=colour, linewidth=0.8, linestyle="--")
        ax.annotate(
            f"level {number} ({level:g} ppm)",
            xy=(1.0, level),
            xycoords=("axes fraction", "data"),
            xytext=(2, 0),
            textcoords="offset points",
            fontsize=6,
            color=colour,
            va="center",
        )
    for r in repairs:
        x_r = np.datetime64(r.isoformat())
        # matplotlib takes a datetime64 through its units machinery; its stubs say float only
        ax.axvline(x_r, color=MUTED, linewidth=0.8, linestyle=":")  # type: ignore[arg-type]
        ax.annotate(
            f"repair {r.isoformat()}",
            xy=(x_r, 1.0),
            xycoords=("data", "axes fraction"),
            xytext=(2, -8),
            textcoords="offset points",
            fontsize=6,
            color=MUTED,
            rotation=90,
            va="top",
        )
    ax.set_ylabel("ppm", fontsize=7, color=INK)
    ax.set_xlabel(f"site time ({tz.key})", fontsize=7, color=INK)
    ax.tick_params(labelsize=6, colors=INK)
    ax.grid(True, color=RULE, linewidth=0.4)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    fig.autofmt_xdate()
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()


def _heatmap_png(readings: pd.DataFrame, tz: ZoneInfo) -> tuple[bytes, float] | None:
    """The PNG and its height/width ratio."""
    from matplotlib.figure import Figure

    if not len(readings):
        return None
    local = readings["time"].dt.tz_convert(tz).dt.tz_localize(None)
    ns = local.array.as_unit("ns").asi8
    day_ns = 86_400 * 10**9
    day = ns // day_ns
    hour = (ns % day_ns) // (3600 * 10**9)
    d0 = int(day.min())
    n_days = int(day.max()) - d0 + 1
    grid = np.full((n_days, 24), -np.inf)
    np.maximum.at(grid, (day - d0, hour), readings["ppm"].to_numpy(dtype=float))
    grid[~np.isfinite(grid)] = np.nan
    height = 2.6 if n_days > 14 else 1.8
    fig = Figure(figsize=(7.2, height), dpi=150)
    ax = fig.add_subplot(1, 1, 1)
    first = np.datetime64(int(d0), "D")
    image = ax.imshow(
        grid.T,
        aspect="auto",
        origin="lower",
        interpolation="nearest",
        cmap="cividis",
        extent=(0, n_days, 0, 24),
    )
    ticks = np.linspace(0, n_days - 1, min(n_days, 8)).astype(int)
    ax.set_xticks(ticks + 0.5)
    ax.set_xticklabels([str(first + int(k)) for k in ticks], fontsize=6)
    ax.set_yticks([0, 6, 12, 18, 24])
    ax.set_ylabel("hour of day (site time)", fontsize=7, color=INK)
    ax.tick_params(labelsize=6, colors=INK)
    bar = fig.colorbar(image, ax=ax, pad=0.01)
    bar.set_label("highest ppm in the hour", fontsize=6)
    bar.ax.tick_params(labelsize=6)
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue(), height / 7.2


def render_review_pdf(
    path: Path,
    review: Review,
    readings_df: pd.DataFrame,
    *,
    title: str,
    system_label: str,
    refrigerant: str,
    molar_mass_g_mol: float,
    repairs: Sequence[date] = (),
    caution: str = CAUTION,
) -> Path:
    """Write the review of one detector channel as a PDF.

    Args:
        path: the file to write.
        review: the result of ``review_channel`` for these readings.
        readings_df: the readings reviewed (columns ``time`` aware, ``ppm``).
        title: document title.
        system_label: the system the channel watches (e.g. "DE-HAM / LT-RACK").
        refrigerant: designation shown next to mg/m³ (e.g. "R-448A").
        molar_mass_g_mol: the refrigerant's (vapour) molar mass for ppm -> mg/m³.
        repairs: repair dates to mark on the trace.
        caution: the report caution (default: the ledger's); the detector caution follows it.
    Returns:
        ``path``.
    """
    from reportlab.lib import colors
    from reportlab.lib.enums import TA_LEFT
    from reportlab.lib.pagesizes import A4
    from reportlab.lib.styles import ParagraphStyle
    from reportlab.lib.units import mm
    from reportlab.pdfgen.canvas import Canvas
    from reportlab.platypus import (
        Image,
        KeepTogether,
        Paragraph,
        SimpleDocTemplate,
        Spacer,
        Table,
        TableStyle,
    )
    from reportlab.platypus.flowables import HRFlowable

    tz = ZoneInfo(review.timezone)
    ink = colors.HexColor(INK)
    base = ParagraphStyle("base", fontName="Helvetica", fontSize=8.5, leading=11, textColor=ink)
    small = ParagraphStyle("small", parent=base, fontSize=7.5, leading=9.5)
    muted = ParagraphStyle("muted", parent=small, textColor=colors.HexColor(MUTED))
    h1 = ParagraphStyle(
        "h1", parent=base, fontName="Helvetica-Bold", fontSize=14, leading=18, alignment=TA_LEFT
    )
    h2 = ParagraphStyle(
        "h2",
        parent=base,
        fontName="Helvetica-Bold",
        fontSize=10,
        leading=13,
        spaceBefore=8,
        spaceAfter=3,
        textColor=colors.HexColor(ACCENT),
    )

    def esc(text: str) -> str:
        return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")

    def table(rows: list[list[object]], widths: list[float], header: bool) -> Table:
        t = Table(rows, colWidths=widths, repeatRows=1 if header else 0)
        style = [
            ("FONT", (0, 0), (-1, -1), "Helvetica", 7.5),
            ("TEXTCOLOR", (0, 0), (-1, -1), ink),
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ("LINEBELOW", (0, 0), (-1, -1), 0.3, colors.HexColor(RULE)),
            ("TOPPADDING", (0, 0), (-1, -1), 2),
            ("BOTTOMPADDING", (0, 0), (-1, -1), 2),
        ]
        if header:
            style += [
                ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor(HEADER_FILL)),
                ("FONT", (0, 0), (-1, 0), "Helvetica-Bold", 7.5),
            ]
        t.setStyle(TableStyle(style))
        return t

    window = (
        f"{_local(review.window_from, tz)} to {_local(review.window_to, tz)} ({tz.key})"
        if review.window_from
        else "no readings"
    )
    levels = ", ".join(f"level {i} {v:g} ppm" for i, v in enumerate(review.levels_ppm, 1))
    story: list[object] = [
        Paragraph(esc(title), h1),
        Paragraph(
            esc(f"{system_label} · channel {review.channel} · {refrigerant} · {window}"), muted
        ),
        Paragraph(esc(f"Levels: {levels}"), muted),
        Spacer(1, 3 * mm),
        HRFlowable(width="100%", thickness=0.6, color=colors.HexColor(ACCENT_LIGHT)),
        Paragraph("Key figures", h2),
    ]
    key_rows = [
        [Paragraph(esc(k), small), Paragraph(esc(v), small)]
        for k, v in _key_figures(review, refrigerant, molar_mass_g_mol, tz)
    ]
    story.append(table(key_rows, [42 * mm, 128 * mm], header=False))

    story.append(Paragraph("Readings over time", h2))
    trace = _trace_png(readings_df, review, repairs, tz)
    story.append(Image(io.BytesIO(trace), width=170 * mm, height=170 * mm * 2.8 / 7.2))
    heat = _heatmap_png(readings_df, tz)
    if heat is not None:
        png, ratio = heat
        story.append(
            KeepTogether(
                [
                    Paragraph("Highest reading by day and hour", h2),
                    Image(io.BytesIO(png), width=170 * mm, height=170 * mm * ratio),
                ]
            )
        )

    story.append(Paragraph("Episodes", h2))
    if review.episodes:
        rows: list[list[object]] = [
            ["level", "start (site time)", "end", "duration (h)", "peak (ppm)", "ppm-hours"]
        ]
        for e in review.episodes[:MAX_EPISODE_ROWS]:
            rows.append(
                [
                    f"{e.level} ({e.level_ppm:g})",
                    _local(e.start, tz),
                    _local(e.end, tz),
                    _num(e.duration_hours, 2),
                    _num(e.peak_ppm),
                    _num(e.ppm_hours, 2),
                ]
            )
        story.append(
            table(rows, [20 * mm, 32 * mm, 32 * mm, 24 * mm, 24 * mm, 24 * mm], header=True)
        )
        if len(review.episodes) > MAX_EPISODE_ROWS:
            story.append(
                Paragraph(
                    f"... and {len(review.episodes) - MAX_EPISODE_ROWS:,} more episodes "
                    "(all are in the JSON export).",
                    muted,
                )
            )
    else:
        story.append(Paragraph("No readings above level 1.", small))
    story.append(
        Paragraph(
            "An episode is a run of consecutive readings above a level; a gap in the readings "
            "ends it. Duration counts each reading as one sample period; ppm-hours sum the "
            "readings' excess over the level.",
            muted,
        )
    )

    story.append(Paragraph("Caution", h2))
    for text in dict.fromkeys(c for c in (caution, DETECTOR_CAUTION) if c):
        story.append(Paragraph(esc(text), small))
        story.append(Spacer(1, 1.5 * mm))

    def footer(canvas: Canvas, doc: SimpleDocTemplate) -> None:
        canvas.saveState()
        canvas.setFont("Helvetica", 6.5)
        canvas.setFillColor(colors.HexColor(MUTED))
        canvas.drawString(20 * mm, 10 * mm, f"{title} · channel {review.channel}")
        canvas.drawRightString(190 * mm, 10 * mm, f"page {doc.page}")
        canvas.restoreState()

    path = Path(path)
    doc = SimpleDocTemplate(
        str(path),
        pagesize=A4,
        leftMargin=20 * mm,
        rightMargin=20 * mm,
        topMargin=16 * mm,
        bottomMargin=16 * mm,
        title=title,
        author="refledger",
        subject=f"detector review, channel {review.channel}",
    )
    doc.build(story, onFirstPage=footer, onLaterPages=footer)
    return path


def write_channel_review(path: Path, result: Any) -> Path:
    """Write a channel's review (``services.detectors.review``'s plain result) as a PDF, titled
    by the channel and its system: the one writer the CLI and the demo share."""
    channel = result.channel
    return render_review_pdf(
        path,
        result.review,
        result.readings,
        title=f"Detector review {channel.site_code}/{channel.code}",
        system_label=f"{channel.site_code}/{channel.system_tag}",
        refrigerant=result.refrigerant,
        molar_mass_g_mol=result.molar_mass_g_mol,
        repairs=result.repairs,
    )
