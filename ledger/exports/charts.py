"""Charts for the PDF reports (matplotlib, Agg backend, no pyplot global state): PNG bytes out.

One look: neutral greys, one blue-grey accent for the bar that matters most, values written at
the bar ends so nobody has to read an axis, no chart junk.
"""

from __future__ import annotations

import io
from collections.abc import Sequence

from ledger.exports.common import ACCENT, ACCENT_LIGHT, INK, MUTED, RULE

DPI = 160


def _figure(width_in: float, height_in: float):
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width_in, height_in), dpi=DPI)
    fig.patch.set_facecolor("white")
    return fig


def _style(ax, title: str) -> None:
    ax.set_title(title, loc="left", fontsize=9.5, color=INK, fontweight="bold", pad=8)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(RULE)
    ax.tick_params(colors=MUTED, labelsize=7.5, length=0)


def _png(fig) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI, bbox_inches="tight", facecolor="white")
    return buf.getvalue()


def _label(value: float, places: int) -> str:
    return f"{value:,.{places}f}"


def ranked_bars(
    labels: Sequence[str], values: Sequence[float], title: str, *, places: int = 1,
    limit: int = 8, width_in: float = 5.0, height_in: float = 2.5,
) -> bytes:
    """Horizontal bars, largest first (at most ``limit``; the rest summed as 'others')."""
    pairs = sorted(zip(labels, values, strict=True), key=lambda p: p[1], reverse=True)
    if any(v for _, v in pairs):
        pairs = [p for p in pairs if p[1]]  # bars of nothing only hide the ones that matter
    if len(pairs) > limit:
        rest = sum(v for _, v in pairs[limit - 1:])
        pairs = pairs[: limit - 1] + [(f"{len(pairs) - limit + 1} others", rest)]
    fig = _figure(width_in, height_in)
    ax = fig.add_subplot(1, 1, 1)
    names = [p[0] for p in pairs][::-1]
    nums = [p[1] for p in pairs][::-1]
    colours = [ACCENT_LIGHT] * len(nums)
    if nums:
        colours[-1] = ACCENT
    ax.barh(names, nums, color=colours, height=0.62)
    top = max(nums, default=0) or 1
    for y, v in enumerate(nums):
        ax.text(v + top * 0.015, y, _label(v, places), va="center", fontsize=7.5, color=INK)
    ax.set_xlim(0, top * 1.18)
    ax.xaxis.set_visible(False)
    ax.spines["bottom"].set_visible(False)
    _style(ax, title)
    if not pairs:
        ax.text(0.5, 0.5, "nothing recorded", transform=ax.transAxes, ha="center", color=MUTED)
    return _png(fig)


def column_bars(
    labels: Sequence[str], values: Sequence[float], title: str, *, places: int = 1,
    highlight: int | None = None, width_in: float = 5.0, height_in: float = 2.5,
) -> bytes:
    """Vertical bars in the given order (months, bands); ``highlight`` index in the accent."""
    fig = _figure(width_in, height_in)
    ax = fig.add_subplot(1, 1, 1)
    colours = [ACCENT_LIGHT] * len(values)
    if highlight is not None and 0 <= highlight < len(values):
        colours[highlight] = ACCENT
    xs = list(range(len(values)))  # positions, not labels: month initials repeat (J, M, A)
    ax.bar(xs, list(values), color=colours, width=0.7)
    ax.set_xticks(xs, list(labels))
    top = max(values, default=0) or 1
    for x, v in enumerate(values):
        if v:
            ax.text(x, v + top * 0.02, _label(v, places), ha="center", va="bottom", fontsize=7,
                    color=INK)
    ax.set_ylim(0, top * 1.2)
    ax.yaxis.set_visible(False)
    ax.spines["left"].set_visible(False)
    _style(ax, title)
    return _png(fig)


def trend_line(
    labels: Sequence[str], values: Sequence[float], title: str, *, places: int = 1,
    width_in: float = 7.0, height_in: float = 2.6,
) -> bytes:
    """A line over years with the last point in the accent and every point labelled."""
    fig = _figure(width_in, height_in)
    ax = fig.add_subplot(1, 1, 1)
    xs = list(range(len(values)))
    ax.plot(xs, list(values), color=ACCENT_LIGHT, linewidth=2, marker="o", markersize=4,
            markerfacecolor=ACCENT_LIGHT, markeredgewidth=0)
    if values:
        ax.plot([xs[-1]], [values[-1]], marker="o", markersize=7, color=ACCENT)
    top = max(values, default=0) or 1
    for x, v in zip(xs, values, strict=True):
        ax.text(x, v + top * 0.05, _label(v, places), ha="center", va="bottom", fontsize=7.5,
                color=INK)
    ax.set_xticks(xs, list(labels))
    ax.set_ylim(0, top * 1.25)
    ax.yaxis.set_visible(False)
    ax.spines["left"].set_visible(False)
    _style(ax, title)
    return _png(fig)


def rate_bands(chronic_percent: float) -> tuple[tuple[str, float, float], ...]:
    """Leak-rate bands (percent of full charge per year) for the distribution chart: (label,
    low, high). The last band starts at the chronic-leak share (the summary's
    ``chronic_percent``, from the regimes: 125 gives "30-125" and "125+")."""
    top = f"{chronic_percent:g}"
    return (
        ("0", 0.0, 0.0),
        ("0-5", 0.0, 5.0),
        ("5-10", 5.0, 10.0),
        ("10-20", 10.0, 20.0),
        ("20-30", 20.0, 30.0),
        (f"30-{top}", 30.0, chronic_percent),
        (f"{top}+", chronic_percent, float("inf")),
    )


def rate_band_counts(rates: Sequence[float], bands: Sequence[tuple[str, float, float]]) -> list[int]:
    """How many systems fall in each band of `rate_bands`.

    0 on its own; then lower bound excluded, upper included; the chronic-leak share and more in
    the last band (the chronic-leak test is "that share or more").
    """
    counts = [0] * len(bands)
    for r in rates:
        if r >= bands[-1][1]:
            counts[-1] += 1
        elif r <= 0:
            counts[0] += 1
        else:
            for i, (_, low, high) in enumerate(bands[1:-1], start=1):
                if low < r <= high or (i == len(bands) - 2 and r > low):
                    counts[i] += 1
                    break
    return counts
