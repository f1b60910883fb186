"""Regulatory regimes: one module per regime, each declaring a `Regime` value.

`REGIMES` maps our regime codes to their `ledger.rules.regime.Regime` values (read-only:
never extend it in place); `_REGISTRY` below lists them, in the order `default_regimes`
returns them. A regime offers ``version``, ``title``, ``gwp_basis``, ``constants`` (also as
``REGIME_VERSION``, ``TITLE``, ``GWP_BASIS``, ``CONSTANTS``),
``tier_of(history, reference, as_of)``, ``run(bookings, reference, as_of)`` and
``compute_obligations(histories, reference, as_of) -> (obligations, findings)``; its duties
are engines of `ledger.rules.engines` configured by its own constants.

Local regulation and the competent authority govern; the schedules computed here are an aid
to be checked (docs/rules/README.md).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import date
from decimal import Decimal
from functools import lru_cache
from itertools import groupby
from types import MappingProxyType

from ledger.domain.booking import book
from ledger.domain.records import (
    Finding,
    Obligation,
    RegimeCode,
    Severity,
    SystemHistory,
)
from ledger.rules import eu, gb, us_82f, us_84c, us_ca, us_wa
from ledger.rules.common import (
    OUT_OF_SCOPE,
    ReferenceLike,
    obligation_sort_key,
    system_source,
)
from ledger.rules.regime import Regime

__all__ = ["EU_MEMBER_STATES", "REGIMES", "SiteProfile", "compute_all", "default_regimes", "site_profile"]

# Every regime, in the order `default_regimes` gives them: a new regime adds its REGIME here.
_REGISTRY: tuple[Regime, ...] = (eu.REGIME, gb.REGIME, us_82f.REGIME, us_84c.REGIME, us_ca.REGIME,
                                 us_wa.REGIME)

REGIMES: Mapping[RegimeCode, Regime] = MappingProxyType({r.code: r for r in _REGISTRY})

# ISO 3166-1 alpha-2 codes of the 27 EU member states (declared by regime eu).
EU_MEMBER_STATES: frozenset[str] = eu.COUNTRIES
# The chronic-leak share shown for every system as an indicator (exports), whatever its regime.
CHRONIC_INDICATOR_PERCENT: Decimal = us_82f.REPORT_PERCENT


@dataclass(frozen=True, slots=True)
class SiteProfile:
    """What services and exports ask of a site's regimes, instead of testing its country.

    Built by `site_profile` from the regimes' own declarations.
    """

    regimes: tuple[RegimeCode, ...]  # the site's known regime codes, in order
    gwp_basis: str  # THE GWP basis of the site: first known regime's, else FALLBACK_BASIS
    mass_unit: str  # "kg" or "lb": default unit of a new site / untyped mass
    leak_rates: bool  # a regime judges leak rates (US): show leak-rate tables, pounds
    chronic_percent: Decimal | None  # share of full charge added in a year that calls for a report
    record_items: tuple[tuple[str, str, str], ...]  # (item, what the text asks, where shown)
    record_title: str | None  # e.g. "EU 517/2014 Art 6"; None when no record map applies
    certificate_scopes: frozenset[str] = frozenset()  # certificate scopes valid at the site


FALLBACK_BASIS = "eu"  # GWP basis of a site without a known regime
FALLBACK_MASS_UNIT = "kg"


def site_profile(regimes: Sequence[RegimeCode]) -> SiteProfile:
    """The profile of a site with these regime codes (unknown codes are skipped).

    Args:
        regimes: the site's regime codes, in the site's order.
    Returns:
        GWP basis and mass unit of the first known regime (else "eu" and "kg"); leak rates
        when any regime judges them; the chronic-leak share and the record-item map of the
        first regime declaring one; the certificate scopes any of them accepts. Memoised per
        tuple of codes (REGIMES is read-only): import and reports ask once per row.
    """
    return _profile(tuple(regimes))


@lru_cache(maxsize=256)
def _profile(regimes: tuple[RegimeCode, ...]) -> SiteProfile:
    known = tuple(code for code in regimes if code in REGIMES)
    values = [REGIMES[code] for code in known]
    chronic = next((r.chronic_percent for r in values if r.chronic_percent is not None), None)
    recorded = next((r for r in values if r.record_items), None)
    return SiteProfile(
        regimes=known,
        gwp_basis=values[0].gwp_basis if values else FALLBACK_BASIS,
        mass_unit=values[0].mass_unit if values else FALLBACK_MASS_UNIT,
        leak_rates=any(r.leak_rates for r in values),
        chronic_percent=chronic,
        record_items=() if recorded is None else recorded.record_items,
        record_title=None if recorded is None else recorded.record_title,
        certificate_scopes=frozenset().union(*(r.certificate_scopes for r in values)),
    )


def default_regimes(country: str, subdivision: str | None = None) -> tuple[RegimeCode, ...]:
    """The regimes a new site gets from where it is (the user may override them).

    Each regime declares the countries it applies in (``countries``), the subdivisions it
    applies in besides (``subdivisions``) and those of its countries it does not
    (``except_subdivisions``); the result keeps the order of `REGIMES`.

    Args:
        country: ISO 3166-1 alpha-2 code ("UK" is accepted for "GB").
        subdivision: ISO 3166-2 code, e.g. "US-CA" or "GB-NIR".
    Returns:
        ("eu",) for EU member states; ("gb",) for the United Kingdom, except ("eu",) for
        Northern Ireland ("GB-NIR"), where the EU F-gas Regulation applies under the Windsor
        Framework (from memory); ("us-82f", "us-84c") for the US, plus "us-ca" in California
        and "us-wa" in Washington; () anywhere else.
    """
    country = country.strip().upper()
    sub = (subdivision or "").strip().upper()
    if country == "UK":
        country = "GB"
    if sub and not sub.startswith(f"{country}-"):
        sub = ""  # a subdivision of another country says nothing here
    out = []
    for code, r in REGIMES.items():
        nationwide = country in r.countries and sub not in r.except_subdivisions
        if nationwide or (sub and sub in r.subdivisions):
            out.append(code)
    return tuple(out)


def compute_all(
    histories: Sequence[SystemHistory], reference: ReferenceLike, as_of: date
) -> tuple[list[Obligation], list[Finding]]:
    """Run each site's regimes over that site's systems and return the union.

    Args:
        histories: systems of any number of sites, with their events.
        reference: the refrigerant tables.
        as_of: the day of evaluation.
    Returns:
        (obligations earliest due first, findings). A system whose site has no regime, or
        that no regime of its site covers, gets an INFO finding saying so; an unknown regime
        code gets a WARNING. Findings repeated by several regimes are given once.
    """
    obligations: list[Obligation] = []
    findings: list[Finding] = []
    ordered = sorted(histories, key=lambda h: (h.site.code, h.system.id))
    for site_code, group in groupby(ordered, key=lambda h: h.site.code):
        site_histories = list(group)
        site = site_histories[0].site
        known = [code for code in site.regimes if code in REGIMES]
        for code in site.regimes:
            if code not in REGIMES:
                findings.append(Finding(f"site {site_code}", f"unknown regime {code!r}: ignored "
                                        f"(known: {', '.join(REGIMES)})", Severity.WARNING,
                                        "regimes"))
        if not known:
            for h in site_histories:
                findings.append(Finding(system_source(h), f"no covered regime applies: site "
                                        f"{site_code} has no regime", Severity.INFO, "regimes"))
            continue
        booked = [book(h) for h in site_histories]  # folded once, read by every regime
        for code in known:
            obs, found = REGIMES[code].run(booked, reference, as_of)
            obligations.extend(obs)
            findings.extend(found)
        for h, b in zip(site_histories, booked, strict=True):
            tiers = [REGIMES[code].tier_of(b, reference, as_of) for code in known]
            if all(t.band == OUT_OF_SCOPE for t in tiers):
                why = "; ".join(f"{t.regime}: {t.reason}" for t in tiers)
                findings.append(Finding(system_source(h), f"no covered regime applies ({why})",
                                        Severity.INFO, "regimes"))
    obligations.sort(key=obligation_sort_key)
    return obligations, list(dict.fromkeys(findings))
