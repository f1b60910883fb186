"""Frozen domain records that rules and reports consume.

Masses are integer nanograms (``*_ng``): exact and summable; a pound (453 592 370 000 ng) and
an ounce (28 349 523 125 ng) are whole numbers of them. Dates that something
happened are site-local ``date``s (``*_on``); times the ledger recorded are aware UTC
``datetime``s (``*_at``).
"""

from __future__ import annotations

import enum
from dataclasses import dataclass, field
from datetime import date, datetime

SiteCode = str
SystemId = int
EventId = int
TechnicianId = int
RegimeCode = str


class Application(enum.StrEnum):
    """Application class of a system, as the US rules and our reports group them."""

    COMMERCIAL_REFRIGERATION = "commercial-refrigeration"  # retail food, cold storage warehouses
    INDUSTRIAL_PROCESS = "industrial-process"  # process cooling in manufacturing, ice rinks
    COMFORT_COOLING = "comfort-cooling"  # air conditioning of occupied space, heat pumps
    TRANSPORT_REFRIGERATION = "transport-refrigeration"  # trucks, trailers, containers
    OTHER = "other"  # anything else


class EquipmentForm(enum.StrEnum):
    """Physical form of the equipment; informative, used for screening-method factors."""

    CENTRAL_PLANT = "central-plant"  # rack / pack serving many cases or coolers
    CONDENSING_UNIT = "condensing-unit"  # remote condensing unit with its evaporators
    SELF_CONTAINED = "self-contained"  # plug-in cabinet or factory-sealed unit
    CHILLER = "chiller"  # liquid chiller
    SPLIT = "split"  # split air conditioner or heat pump
    OTHER = "other"  # anything else


class EventKind(enum.StrEnum):
    """Kinds of event; the only way a system's state changes."""

    IN_SERVICE = "in-service"  # placed in service: refrigerant, full charge
    ADD = "add"  # refrigerant added (top-up, initial fill after repair)
    RECOVER = "recover"  # refrigerant recovered from the system (stays in service)
    CHECK = "check"  # leak check; result no-leak / leak-found
    REPAIR = "repair"  # leak repaired
    FOLLOW_UP = "follow-up"  # follow-up check / verification test after a repair
    DETECTION_ON = "detection-on"  # leak detection system installed
    DETECTION_OFF = "detection-off"  # leak detection system removed
    DETECTION_CHECK = "detection-check"  # leak detection system checked
    CHARGE_REVISED = "charge-revised"  # full charge re-determined
    RETROFIT = "retrofit"  # changed to another refrigerant and charge
    RETIRE = "retire"  # taken out of service; recovered mass and destination
    VOID = "void"  # voids one earlier event, with a reason


class CheckResult(enum.StrEnum):
    """Outcome of a leak check."""

    NO_LEAK = "no-leak"  # no leak found
    LEAK_FOUND = "leak-found"  # a leak was found (location recorded where known)


class FollowUpResult(enum.StrEnum):
    """Outcome of a follow-up check or verification test after a repair."""

    PASS = "pass"  # repair holds
    FAIL = "fail"  # still leaking


class CylinderKind(enum.StrEnum):
    """What a cylinder holds."""

    VIRGIN = "virgin"  # new refrigerant from a producer
    RECOVERY = "recovery"  # recovered refrigerant, not yet processed
    RECLAIMED = "reclaimed"  # reprocessed to specification by a reclaimer


class Destination(enum.StrEnum):
    """Where recovered refrigerant went."""

    REUSE = "reuse"  # kept by the owner for reuse in its own systems
    RECLAIM = "reclaim"  # sent to a reclaimer
    DESTRUCTION = "destruction"  # sent for destruction
    RETURNED = "returned"  # returned to the supplier in a recovery cylinder
    UNKNOWN = "unknown"  # not recorded


class Severity(enum.StrEnum):
    """How serious a finding is."""

    ERROR = "error"  # the record cannot be accepted
    WARNING = "warning"  # accepted, but shown to the user and in reports
    INFO = "info"  # context only


@dataclass(frozen=True, slots=True)
class Finding:
    """A problem in user data or a conclusion of a rule, collected rather than raised."""

    source: str  # record id or file:row
    message: str
    severity: Severity = Severity.WARNING
    field: str | None = None


@dataclass(frozen=True, slots=True)
class Site:
    """A place holding systems; the regimes that apply follow from its country."""

    id: int
    code: SiteCode
    name: str
    country: str  # ISO 3166-1 alpha-2
    subdivision: str | None  # ISO 3166-2, e.g. US-CA
    timezone: str
    regimes: tuple[RegimeCode, ...]
    leak_rate_method: str = "annualizing"  # US facilities pick one method
    mass_unit: str = "kg"  # preferred display unit


@dataclass(frozen=True, slots=True)
class System:
    """One piece of equipment in the regulatory sense; static facts only (state is derived)."""

    id: SystemId
    site_code: SiteCode
    tag: str
    description: str = ""
    application: Application = Application.OTHER
    equipment_form: EquipmentForm = EquipmentForm.OTHER
    hermetic: bool = False
    residential: bool = False
    location: str = ""
    maker: str = ""
    model: str = ""
    serial: str = ""
    defrost_every_hours: float | None = None


def _within(start: date | None, end: date | None, on: date) -> bool:
    return (start is None or on >= start) and (end is None or on <= end)


@dataclass(frozen=True, slots=True)
class Certificate:
    """A personal certificate held by a technician."""

    scheme: str
    number: str
    category: str = ""
    valid_from: date | None = None
    valid_to: date | None = None
    scope: str = ""  # ledger.domain.certificates.Scope value; "" = recorded before scopes were kept
    issuer: str = ""  # certification body

    def valid_on(self, on: date) -> bool:
        """True when the certificate covers the given day."""
        return _within(self.valid_from, self.valid_to, on)


@dataclass(frozen=True, slots=True)
class CompanyCertificate:
    """A company (undertaking) certificate, e.g. under Reg. (EU) 2024/573 Art 10."""

    company: str
    scope: str
    number: str
    issuer: str = ""
    valid_from: date | None = None
    valid_to: date | None = None

    def valid_on(self, on: date) -> bool:
        """True when the certificate covers the given day."""
        return _within(self.valid_from, self.valid_to, on)


@dataclass(frozen=True, slots=True)
class Technician:
    """A person who works on systems, with their certificates and employer."""

    id: TechnicianId
    name: str
    company: str = ""
    certificates: tuple[Certificate, ...] = ()


@dataclass(frozen=True, slots=True)
class Cylinder:
    """A refrigerant cylinder, weighed before and after charging or recovery."""

    id: str
    refrigerant: str
    kind: CylinderKind
    tare_ng: int | None = None


@dataclass(frozen=True, slots=True)
class Event:
    """One append-only entry in a system's history."""

    id: EventId
    system_id: SystemId
    kind: EventKind
    performed_on: date
    recorded_at: datetime | None = None
    mass_ng: int | None = None  # added / recovered / recovered at retirement
    refrigerant: str | None = None  # in-service and retrofit
    charge_ng: int | None = None  # in-service, charge-revised, retrofit
    result: str | None = None  # CheckResult or FollowUpResult value
    location: str | None = None  # where the leak was found / repaired
    method: str | None = None  # leak check method (direct, indirect, detector...)
    destination: str | None = None  # Destination of recovered gas
    cylinder_id: str | None = None
    cylinder_before_ng: int | None = None
    cylinder_after_ng: int | None = None
    technician: str | None = None  # name of who did the work
    company: str | None = None
    certificate: str | None = None  # "scheme number (category)" valid on the day, if any
    recorded_by: str | None = None
    note: str = ""
    voids_id: EventId | None = None  # VOID events: the event they void
    reason: str | None = None  # VOID events: why
    attachments: tuple[str, ...] = ()  # SHA-256 hex digests of documents
    reclaimed: bool = False  # added refrigerant was recycled or reclaimed gas
    chain_hash: str | None = None
    # False when the work was recorded without a certificate valid for it (none named, lapsed,
    # out of scope): such a check does not meet a leak-check or follow-up-check duty.
    certified: bool = True
    facility: str | None = None  # EU Art 6(c): recycling/reclamation/destruction facility, name and address
    facility_certificate: str | None = None  # ... and its certificate number, where applicable


@dataclass(frozen=True, slots=True)
class SystemState:
    """A system's state on a day, folded from its events."""

    in_service: bool
    refrigerant: str | None
    full_charge_ng: int
    detection_system: bool
    in_service_on: date | None
    retired_on: date | None
    last_check_on: date | None
    last_repair_on: date | None
    open_leaks: tuple[EventId, ...]  # leak-found checks and failed follow-ups without a later repair
    refrigerant_since: date | None  # date of in-service or last retrofit
    events: tuple[Event, ...] = field(default=())  # effective events up to as_of, date order


class ObligationKind(enum.StrEnum):
    """What a regime expects to happen."""

    LEAK_CHECK = "leak-check"  # periodic leak check (EU/GB) by a certified person
    FOLLOW_UP_CHECK = "follow-up-check"  # check that a repair holds (EU/GB)
    REPAIR = "repair"  # repair a found leak or an exceedance by a deadline
    VERIFICATION_TEST = "verification-test"  # US initial / follow-up verification of a repair
    LEAK_INSPECTION = "leak-inspection"  # US periodic inspection after an exceedance; CA
    DETECTION_SYSTEM = "detection-system"  # install a leak detection system
    DETECTION_SYSTEM_CHECK = "detection-system-check"  # check the detection system works
    REPORT = "report"  # a report to an authority


class ObligationStatus(enum.StrEnum):
    """Where an obligation stands on the as-of day."""

    OPEN = "open"  # not yet met, not yet late
    MET = "met"  # met by an event (``met_by``)
    OVERDUE = "overdue"  # past its due date and not met


class Confidence(enum.StrEnum):
    """How well a rule's constant is established."""

    CHECKED = "checked"  # read against the legal text or an official guidance page
    SECONDARY = "secondary"  # from trade press or an agency fact sheet, not the legal text
    MEMORY = "memory"  # from memory; to be checked against the text
    POLICY = "policy"  # a site policy of ours, not a legal duty


@dataclass(frozen=True, slots=True)
class Basis:
    """Where a rule comes from: the article or section and how sure we are of it."""

    citation: str  # e.g. "Reg. (EU) 2024/573 Art 5(1)"
    confidence: Confidence
    note: str = ""

    def __str__(self) -> str:
        return f"{self.citation} [{self.confidence.value}]"


@dataclass(frozen=True, slots=True)
class Obligation:
    """One thing a regime expects of a system or facility, with its deadline and basis."""

    regime: RegimeCode
    kind: ObligationKind
    due_on: date
    basis: Basis
    status: ObligationStatus
    system_id: SystemId | None = None  # None for a facility duty
    site_code: SiteCode | None = None
    earliest_on: date | None = None
    caused_by: EventId | None = None
    met_by: EventId | None = None
    detail: str = ""


@dataclass(frozen=True, slots=True)
class Tier:
    """A system's band under one regime and the periodic interval it sets."""

    regime: RegimeCode
    band: str  # e.g. "50-500 t CO2e", "exempt", "out of scope"
    interval_months: int | None  # None where no periodic check applies
    basis: Basis
    reason: str = ""


@dataclass(frozen=True, slots=True)
class Filing:
    """A record that a report to an authority was filed (append-only, like events)."""

    site_code: SiteCode
    regime: RegimeCode
    period_year: int  # the calendar year the report covers
    filed_on: date
    system_id: SystemId | None = None  # for a report about one system (e.g. a chronic leaker)
    reference: str = ""  # the authority's receipt or submission number
    recorded_by: str | None = None


@dataclass(frozen=True, slots=True)
class SystemHistory:
    """Everything a regime needs about one system: its site, its static facts, its events."""

    site: Site
    system: System
    events: tuple[Event, ...]  # every event, voids included, in any order
