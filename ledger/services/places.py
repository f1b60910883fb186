"""Country codes and default time zones, from the IANA tables the tzdata package ships."""

from __future__ import annotations

from functools import cache
from importlib import resources

# A state's own zone where the country's first-listed zone would be wrong for most sites.
SUBDIVISION_ZONES = {
    "US-CA": "America/Los_Angeles",
    "US-WA": "America/Los_Angeles",
    "US-OR": "America/Los_Angeles",
    "US-TX": "America/Chicago",
    "US-IL": "America/Chicago",
    "US-CO": "America/Denver",
    "US-AZ": "America/Phoenix",
}


def _table(name: str) -> list[list[str]]:
    text = resources.files("tzdata").joinpath("zoneinfo", name).read_text(encoding="utf-8")
    return [line.split("\t") for line in text.splitlines() if line and not line.startswith("#")]


@cache
def countries() -> dict[str, str]:
    """ISO 3166-1 alpha-2 code -> country name."""
    return {row[0]: row[1] for row in _table("iso3166.tab")}


@cache
def first_zones() -> dict[str, str]:
    """Country code -> the first zone zone.tab lists for it."""
    zones: dict[str, str] = {}
    for row in _table("zone.tab"):
        zones.setdefault(row[0], row[2])
    return zones


def default_timezone(country: str, subdivision: str | None) -> str:
    """A sensible default zone for a site; the user can always name one."""
    if subdivision and subdivision in SUBDIVISION_ZONES:
        return SUBDIVISION_ZONES[subdivision]
    return first_zones().get(country, "UTC")
