"""The exception hierarchy for exceptional conditions.

User-data problems inside a record set are `Finding` values (see `ledger.domain.records`);
exceptions are for things that stop a command: a bad unit, an unknown name, a schema that is
behind. The CLI turns every `LedgerError` into one line on stderr and exit code 2.
"""

from __future__ import annotations


class LedgerError(Exception):
    """Base of every error a user can cause; the CLI prints its message without a traceback."""


class InputError(LedgerError):
    """A value typed by the user is malformed; the message names the field and the value."""

    def __init__(self, field: str, value: object, problem: str) -> None:
        self.field = field
        self.value = value
        self.problem = problem
        super().__init__(f"{field}: {value!r} {problem}")


class UnitError(InputError):
    """A mass (or other quantity) could not be parsed or has the wrong dimension."""


class NotFound(LedgerError):
    """An id, code or name that the ledger does not know."""


class UnknownRefrigerant(NotFound):
    """A refrigerant name not in the reference data; carries the closest known names."""

    def __init__(self, name: str, suggestions: tuple[str, ...] = ()) -> None:
        self.name = name
        self.suggestions = suggestions
        hint = f"; closest known: {', '.join(suggestions)}" if suggestions else ""
        super().__init__(f"refrigerant: {name!r} is not a known refrigerant{hint}")


class Conflict(LedgerError):
    """The request contradicts what the ledger already holds (duplicate code, wrong gas, ...)."""


class SchemaOutOfDate(LedgerError):
    """The database is not at the migration head; `refledger db upgrade` fixes it."""


class Rejected(LedgerError):
    """A request that validation refused; the message starts with the field it is about."""


class NeedsConfirmation(LedgerError):
    """A request that is possible but looks like a mistake; repeat it with confirmation.

    ``reasons`` holds one human sentence per doubt (a mass above the full charge, below 1 g,
    the same event recorded already). Nothing was written.
    """

    def __init__(self, reasons: tuple[str, ...], hint: str = "repeat with --confirm if it is right") -> None:
        self.reasons = tuple(reasons)
        self.hint = hint
        super().__init__(f"confirm: {' '.join(self.reasons)} Nothing was recorded; {hint}.")

    def __reduce__(self):
        return (type(self), (self.reasons, self.hint))  # keeps the reasons across processes (pickling)
