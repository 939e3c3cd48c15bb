"""CAS Registry Numbers: format and check digit.

The check digit is the last digit; it equals the sum of the other digits, each
multiplied by its position counted from the right (1 for the digit just before the
check digit), modulo 10 (CAS, "CAS Registry Number and Check Digit" — the published rule).
"""

from __future__ import annotations

import re

__all__ = ["CasNumberError", "cas_check_digit", "validate_cas"]

_CAS = re.compile(r"^(\d{2,7})-(\d{2})-(\d)$")


class CasNumberError(ValueError):
    """A CAS number with a bad shape or a wrong check digit; carries the text."""

    def __init__(self, text: str, reason: str) -> None:
        self.text = text
        self.reason = reason
        super().__init__(f"invalid CAS number {text!r}: {reason}")


def cas_check_digit(digits: str) -> int:
    """The check digit for the CAS digits before it (hyphens ignored).

    >>> cas_check_digit("7732-18")  # water, 7732-18-5
    5
    """
    body = digits.replace("-", "")
    return sum(position * int(d) for position, d in enumerate(reversed(body), start=1)) % 10


def validate_cas(text: str) -> str:
    """Return the CAS number, stripped, if its shape and check digit are right.

    Raises :class:`CasNumberError` otherwise.

    >>> validate_cas(" 1306-19-0 ")
    '1306-19-0'
    """
    value = (text or "").strip()
    match = _CAS.match(value)
    if not match:
        raise CasNumberError(value, "expected the form NNNNNNN-NN-N (2 to 7 digits, 2 digits, 1 check digit)")
    expected = cas_check_digit(match.group(1) + match.group(2))
    if expected != int(match.group(3)):
        raise CasNumberError(value, f"check digit is {match.group(3)}, expected {expected}")
    return value
