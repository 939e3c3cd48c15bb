"""Domain errors shared by the service layer; ``service.api.errors`` maps them to HTTP.

Each subclasses a built-in and carries its context. The pure core has its own
(FormulaError, QuantityError, CasNumberError, DataFileError), all ValueErrors.
"""

from __future__ import annotations

from typing import Any, Optional

__all__ = ["NotFound", "Conflict", "InvalidInput", "Unauthenticated", "Forbidden", "CsrfFailed", "Blocked"]


class NotFound(LookupError):
    """No such record (or it is not visible)."""

    def __init__(self, entity: str, ident: Any) -> None:
        self.entity = entity
        self.ident = ident
        super().__init__(f"{entity} {ident} not found")


class Conflict(ValueError):
    """The request contradicts what is stored (a duplicate label, a retired record)."""

    def __init__(self, message: str, field: Optional[str] = None, value: Any = None) -> None:
        self.field = field
        self.value = value
        super().__init__(message)


class InvalidInput(ValueError):
    """A value that fails a check beyond its shape (an unknown reference, an empty list)."""

    def __init__(self, field: str, message: str, value: Any = None) -> None:
        self.field = field
        self.value = value
        super().__init__(f"{field}: {message}")


class Unauthenticated(PermissionError):
    """No signed-in user and no valid token."""


class Forbidden(PermissionError):
    """The signed-in user may not do this; carries what was refused."""

    def __init__(self, message: str, details: Any = None) -> None:
        self.details = details
        super().__init__(message)


class CsrfFailed(PermissionError):
    """A form arrived without its security token, or with a stale one."""


class Blocked(Conflict):
    """A step refused because rule findings at level ``block`` stand in its way; carries them."""

    def __init__(self, message: str, findings: list) -> None:
        super().__init__(message)
        self.findings = findings
