"""Regulatory regimes: one module per regime, each a set of pure functions.

`REGIMES` maps our regime codes to their modules (read-only: never extend it in place).
Every module offers ``REGIME_VERSION``, ``TITLE``, ``GWP_BASIS``, ``CONSTANTS``,
``tier_of(history, reference, as_of)`` and
``compute_obligations(histories, reference, as_of) -> (obligations, findings)``.

Local regulation and the competent authority govern; the schedules computed here are an aid
to be checked (docs/rules/README.md).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import date
from itertools import groupby
from types import MappingProxyType

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
    RegimeModule,
    obligation_sort_key,
    system_source,
)

__all__ = ["EU_MEMBER_STATES", "REGIMES", "compute_all", "default_regimes"]

REGIMES: Mapping[RegimeCode, RegimeModule] = MappingProxyType({
    "eu": eu,
    "gb": gb,
    "us-82f": us_82f,
    "us-84c": us_84c,
    "us-ca": us_ca,
    "us-wa": us_wa,
})

# ISO 3166-1 alpha-2 codes of the 27 EU member states; "EL" is the EU's own code for Greece.
EU_MEMBER_STATES: frozenset[str] = frozenset({
    "AT", "BE", "BG", "HR", "CY", "CZ", "DK", "EE", "FI", "FR", "DE", "GR", "EL", "HU", "IE",
    "IT", "LV", "LT", "LU", "MT", "NL", "PL", "PT", "RO", "SK", "SI", "ES", "SE",
})


def default_regimes(country: str, subdivision: str | None = None) -> tuple[RegimeCode, ...]:
    """The regimes a new site gets from where it is (the user may override them).

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
    if country in EU_MEMBER_STATES:
        return ("eu",)
    if country == "GB":
        return ("eu",) if sub == "GB-NIR" else ("gb",)
    if country == "US":
        state = {"US-CA": ("us-ca",), "US-WA": ("us-wa",)}.get(sub, ())
        return ("us-82f", "us-84c", *state)
    return ()


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
        for code in known:
            obs, found = REGIMES[code].compute_obligations(site_histories, reference, as_of)
            obligations.extend(obs)
            findings.extend(found)
        for h in site_histories:
            tiers = [REGIMES[code].tier_of(h, reference, as_of) for code in known]
            if all(t.band == OUT_OF_SCOPE for t in tiers):
                why = "; ".join(f"{t.regime}: {t.reason}" for t in tiers)
                findings.append(Finding(system_source(h), f"no covered regime applies ({why})",
                                        Severity.INFO, "regimes"))
    obligations.sort(key=obligation_sort_key)
    return obligations, list(dict.fromkeys(findings))
