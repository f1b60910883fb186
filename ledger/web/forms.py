"""The visit form: from the fields a technician filled in to event drafts, and errors back to
the fields they are about (with the CLI's own messages).

A visit has up to four parts, recorded in this order: leak check, repair, top-up (by mass, or
by cylinder weights before/after) and follow-up check. A number typed without a unit is taken
in the site's unit (kg or lb).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import date

from ledger.domain.drafts import EventDraft
from ledger.domain.records import EventKind
from ledger.errors import InputError, LedgerError
from ledger.inputs import parse_day
from ledger.units import parse_mass_ng

BARE_NUMBER = re.compile(r"^\s*\d+(?:[.,]\d*)?\s*$")
# The CLI's option names, per part of the visit, to the form field beside which an error shows.
FIELD_OF: dict[tuple[str, str], str] = {
    ("check", "--result"): "check_result",
    ("check", "--where"): "check_where",
    ("repair", "--where"): "repair_where",
    ("add", "--mass"): "topup_mass",
    ("add", "--before"): "before",
    ("add", "--after"): "after",
    ("add", "--before/--after"): "before",
    ("add", "--cylinder"): "cylinder",
    ("add", "--refrigerant"): "cylinder",
    ("follow-up", "--result"): "followup_result",
}
COMMON_FIELDS = {"--on": "on", "--tech": "tech"}
TEXT_LIMIT = 2000  # characters of a note or location; longer is a paste gone wrong


@dataclass
class VisitForm:
    """The fields as typed (shown again after an error) and the errors by field."""

    values: dict[str, str]
    errors: dict[str, str] = field(default_factory=dict)

    def get(self, name: str) -> str:
        return self.values.get(name, "")


def _mass(form: VisitForm, name: str, unit: str, label: str) -> int | None:
    text = form.get(name).strip()
    if not text:
        return None
    if BARE_NUMBER.match(text):
        text = f"{text.replace(',', '.')} {unit}"
    try:
        return parse_mass_ng(text, field=label)
    except InputError as exc:
        form.errors[name] = str(exc)
        return None


def _text(form: VisitForm, name: str) -> str | None:
    text = form.get(name).strip()
    if len(text) > TEXT_LIMIT:
        form.errors[name] = f"is longer than {TEXT_LIMIT} characters"
        return None
    return text or None


def drafts_from(form: VisitForm, *, unit: str, technician: str | None, recorded_by: str,
                attachments: tuple[str, ...] = ()) -> list[EventDraft]:
    """The drafts of a visit, in recording order; parsing errors go into ``form.errors``."""
    on: date | None = None
    try:
        on = parse_day(form.get("on"), field="--on")
    except InputError as exc:
        form.errors["on"] = str(exc)
    note = _text(form, "note") or ""
    common = {"technician": technician or None, "recorded_by": recorded_by, "note": note, "attachments": attachments}
    parts: list[tuple[EventKind, dict[str, object]]] = []
    if form.get("check_result"):
        parts.append((EventKind.CHECK, {"result": form.get("check_result"), "location": _text(form, "check_where"),
                                        "method": _text(form, "check_method")}))
    if form.get("repair") or form.get("repair_where").strip():
        parts.append((EventKind.REPAIR, {"location": _text(form, "repair_where")}))
    mode = form.get("topup")
    if mode == "mass":
        parts.append((EventKind.ADD, {"mass_ng": _mass(form, "topup_mass", unit, "--mass")}))
        if not form.get("topup_mass").strip() and "topup_mass" not in form.errors:
            form.errors["topup_mass"] = "--mass: give the mass added"
    elif mode == "cylinder":
        before = _mass(form, "before", unit, "--before")
        after = _mass(form, "after", unit, "--after")
        if not form.get("cylinder"):
            form.errors["cylinder"] = "--cylinder: choose the cylinder the gas came from"
        parts.append((EventKind.ADD, {"cylinder_code": form.get("cylinder") or None,
                                      "cylinder_before_ng": before, "cylinder_after_ng": after}))
    elif mode:
        form.errors["topup"] = f"top-up: {mode!r} is not one of mass, cylinder"
    if form.get("followup_result"):
        parts.append((EventKind.FOLLOW_UP, {"result": form.get("followup_result"),
                                            "method": _text(form, "followup_method")}))
    if not parts and not form.errors:
        form.errors["visit"] = "visit: fill in at least one part (leak check, repair, top-up or follow-up)"
    if form.errors or on is None:
        return []
    return [EventDraft(kind=kind, performed_on=on, **common, **fields) for kind, fields in parts]  # type: ignore[arg-type]  # pydantic checks each field's type


def place_error(form: VisitForm, exc: LedgerError, kind: EventKind | None) -> None:
    """Put a service error beside the field it names (else at the top of the form)."""
    message = str(exc)
    name = exc.field if isinstance(exc, InputError) else message.split(":", 1)[0]
    target = COMMON_FIELDS.get(name) or (FIELD_OF.get((kind.value, name)) if kind else None) or "visit"
    form.errors[target] = message


def form_values(data: Mapping[str, object]) -> dict[str, str]:
    """Text fields of a submitted form (files and repeated keys left out)."""
    return {k: v for k, v in data.items() if isinstance(v, str)}
