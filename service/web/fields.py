"""What the inventory forms share: a form's text as the API's body, and errors on the fields they name.

The body is validated by the API's own schema; pydantic's and the store's errors go next to the field
they name (``components[1].amount`` -> ``components-1-amount``) and into the summary at the top.
"""

from __future__ import annotations

import re
from typing import Optional

from pydantic import ValidationError

from service.chem.units import QuantityError
from service.errors import Conflict, InvalidInput

__all__ = ["whole", "number", "text_or_none", "field_message", "field_name", "validation_errors", "store_error", "summary"]

_INDEXED = re.compile(r"^([a-z_]+)\[(\d+)\]\.([a-z_]+)$")


def number(text: str):
    """A number typed in a box; text that is not one goes on, so the schema names the field."""
    text = text.strip()
    if not text:
        return None
    try:
        return float(text)
    except ValueError:
        return text


def whole(text: str):
    """A whole number typed in a box; other text goes on, so the schema names the field."""
    text = text.strip()
    # ASCII digits only: str.isdigit() also accepts "²", which int() refuses
    return int(text) if text.isascii() and text.isdigit() and len(text) <= 10 else text or None


_MESSAGES = {
    "missing": "Required.", "literal_error": "Choose one of the listed values.",
    "float_type": "Enter a number.", "float_parsing": "Enter a number.", "int_type": "Enter a whole number.",
    "int_parsing": "Enter a whole number.", "finite_number": "Enter a finite number.",
}


_BOUNDS = {"less_than_equal": ("le", "At most {}."), "less_than": ("lt", "Below {}."),
           "greater_than_equal": ("ge", "At least {}."), "greater_than": ("gt", "Above {}."),
           "string_too_long": ("max_length", "At most {} characters."), "too_long": ("max_length", "At most {} rows.")}


def field_message(err: dict) -> str:
    """pydantic's message in a form's words ("At most 1200." rather than "Input should be less than or equal to 1200")."""
    kind, ctx = err["type"], err.get("ctx") or {}
    if kind == "too_short":
        return "Add at least one row with a value."
    if kind == "string_too_short":
        return "Required." if ctx.get("min_length") == 1 else f"At least {ctx.get('min_length')} characters."
    if kind in _BOUNDS and _BOUNDS[kind][0] in ctx:
        key, text = _BOUNDS[kind]
        return text.format(f"{ctx[key]:g}" if isinstance(ctx[key], float) else ctx[key])
    message = _MESSAGES.get(kind) or err["msg"].removeprefix("Value error, ")
    return message[:1].upper() + message[1:]


def text_or_none(text: Optional[str]) -> Optional[str]:
    return text.strip() if text and text.strip() else None


def field_name(loc) -> str:
    """The form field a body location names: ("components", 1, "amount") -> "components-1-amount"."""
    parts = [str(p) for p in loc if p != "__root__"]
    if len(parts) >= 3 and parts[1].isdigit():
        return "-".join(parts[:3])
    if len(parts) == 2 and parts[1].isdigit():
        return f"{parts[0]}-{parts[1]}"
    return parts[0] if parts else "form"


def validation_errors(exc: ValidationError, rename: Optional[dict] = None) -> dict[str, str]:
    """pydantic's errors by form field, in the form's words (first error per field)."""
    out: dict[str, str] = {}
    for err in exc.errors():
        name = field_name(tuple(err["loc"]))
        out.setdefault((rename or {}).get(name, name), field_message(err))
    return out


def store_error(exc: Exception, rename: Optional[dict] = None) -> dict[str, str]:
    """An InvalidInput, Conflict or QuantityError of the store on the form field it names."""
    field = getattr(exc, "field", None) or "form"
    found = _INDEXED.match(field)
    name = "-".join(found.groups()) if found else field
    message = getattr(exc, "reason", None) or (str(exc).split(": ", 1)[-1] if isinstance(exc, InvalidInput)
                                               else str(exc))
    return {(rename or {}).get(name, name): message[:1].upper() + message[1:]}


def summary(errors: dict[str, str], labels: dict[str, str]) -> list[tuple[str, str, str]]:
    """(field id, what a person calls it, message) for the summary at the top, in the form's order."""
    order = list(labels)
    return [(f, labels.get(f, f.replace("-", " ").replace("_", " ")), errors[f])
            for f in sorted(errors, key=lambda f: order.index(f) if f in order else len(order))]


REFUSALS = (InvalidInput, Conflict, QuantityError)  # what the store answers a body it cannot take with
