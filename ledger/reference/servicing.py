"""Packaged servicing prohibitions and retrofit targets (servicing.csv, retrofits.csv).

Pure and stdlib-only, like the refrigerant tables: read once, frozen, passed to the rules.
Each row names its citation and a confidence mark (checked / secondary / memory).
"""

from __future__ import annotations

import csv
import functools
import io
from dataclasses import dataclass
from datetime import date
from decimal import Decimal

__all__ = ["RetrofitTarget", "ServicingBan", "load_retrofits", "load_servicing"]


@dataclass(frozen=True, slots=True)
class ServicingBan:
    """One servicing prohibition: what may no longer be used to top up which equipment."""

    regime: str  # the regime code whose sites it binds
    code: str  # our own short name for the row
    what: str  # one line: the refrigerants and equipment it covers
    gwp_from: Decimal | None  # refrigerants with this GWP or more (regime basis); None: any
    ods: bool  # True: ozone-depleting refrigerants (HCFC/CFC) only
    applications: frozenset[str]  # Application values, or {"refrigeration"} / {"all"}
    charge_from_t: Decimal | None  # equipment of this many t CO2e or more; None: any size
    from_on: date  # the day it applies from
    refrigerant_use: str  # "virgin" (reclaimed/recycled still allowed), "any", "reclaimed only"
    citation: str
    confidence: str
    note: str


@dataclass(frozen=True, slots=True)
class RetrofitTarget:
    """A named lower-GWP refrigerant an existing system of one refrigerant is often moved to."""

    refrigerant: str
    applications: frozenset[str]
    target: str
    source: str


def _text(filename: str) -> str:
    from importlib import resources

    return resources.files("ledger.reference").joinpath(filename).read_text(encoding="utf-8")


def parse_servicing(text: str) -> tuple[ServicingBan, ...]:
    """Rows of servicing.csv as records (ValueError names a bad line)."""
    out = []
    reader = csv.DictReader(io.StringIO(text))
    for row in reader:
        try:
            out.append(ServicingBan(
                regime=row["regime"], code=row["code"], what=row["what"],
                gwp_from=Decimal(row["gwp_from"]) if row["gwp_from"] else None,
                ods=row["ods"] == "yes",
                applications=frozenset(row["applications"].split(";")),
                charge_from_t=Decimal(row["charge_from_t"]) if row["charge_from_t"] else None,
                from_on=date.fromisoformat(row["from_on"]),
                refrigerant_use=row["refrigerant_use"], citation=row["citation"],
                confidence=row["confidence"], note=row["note"]))
        except (KeyError, ValueError, ArithmeticError) as exc:
            raise ValueError(f"servicing.csv:{reader.line_num}: {exc}") from None
    return tuple(out)


def parse_retrofits(text: str) -> tuple[RetrofitTarget, ...]:
    """Rows of retrofits.csv as records."""
    return tuple(RetrofitTarget(row["refrigerant"], frozenset(row["applications"].split(";")),
                                row["target"], row["source"])
                 for row in csv.DictReader(io.StringIO(text)))


@functools.cache
def load_servicing() -> tuple[ServicingBan, ...]:
    """The packaged servicing prohibitions."""
    return parse_servicing(_text("servicing.csv"))


@functools.cache
def load_retrofits() -> tuple[RetrofitTarget, ...]:
    """The packaged retrofit targets."""
    return parse_retrofits(_text("retrofits.csv"))
