"""ORM records to JSON-ready dicts (units in every number's name)."""

from __future__ import annotations

import dataclasses
import datetime as dt
from typing import Any, Iterable

from service.store.models import Lab, Location, Mixture, Stock, StockMovement, Substance

__all__ = ["dump", "movement"]


def _ts(value: dt.datetime | dt.date | None) -> str | None:
    return None if value is None else value.isoformat()


def _lifecycle(record) -> dict[str, Any]:
    return {
        "created_at": _ts(record.created_at),
        "updated_at": _ts(record.updated_at),
        "retired_at": _ts(record.retired_at),
    }


def element_rows(elements: Iterable) -> list[dict[str, Any]]:
    """Rows of stored element records (``.element``, ``.mass_ug``)."""
    return element_rows_from({e.element: e.mass_ug for e in elements})


def element_rows_from(masses_ug: dict[str, int]) -> list[dict[str, Any]]:
    """Element masses {symbol: µg} as rows with units in the names."""
    return [{"element": s, "mass_ug": ug, "mass_mg": ug / 1000} for s, ug in masses_ug.items()]


def lab(record: Lab) -> dict[str, Any]:
    return {"id": record.id, "code": record.code, "name": record.name, "building": record.building, **_lifecycle(record)}


def location(record: Location) -> dict[str, Any]:
    return {
        "id": record.id,
        "lab_id": record.lab_id,
        "building": record.building,
        "room": record.room,
        "storage": record.storage,
        "kind": record.kind,
        **_lifecycle(record),
    }


def substance(record: Substance) -> dict[str, Any]:
    return {
        "id": record.id,
        "key": record.key,
        "name": record.name,
        "synonyms": record.synonyms,
        "formula": record.formula,
        "cas": record.cas,
        "state": record.state,
        "density_g_per_ml": record.density_g_per_ml,
        "flash_point_c": record.flash_point_c,
        "boiling_point_c": record.boiling_point_c,
        "autoignition_c": record.autoignition_c,
        "hazard": record.hazard,
        "flags": record.flags,
        "source": record.source,
        "physical_source": record.physical_source,
        "origin": record.origin,
        **_lifecycle(record),
    }


def _quantity(kind: str, micro: int) -> dict[str, Any]:
    return {"value": micro / 1000, "unit": "mg" if kind == "mass" else "mL", "kind": kind}


def stock(record: Stock) -> dict[str, Any]:
    return {
        "id": record.id,
        "label": record.label,
        "substance_id": record.substance_id,
        "substance": record.substance.name,
        "formula": record.substance.formula,
        "lab_id": record.lab_id,
        "location_id": record.location_id,
        "amount": record.amount_text,
        "quantity": _quantity(record.quantity_kind, record.quantity_micro),
        "purity_percent": record.purity_percent,
        "density_g_per_ml": record.density_g_per_ml or record.substance.density_g_per_ml,
        "opened_on": _ts(record.opened_on),
        "expires_on": _ts(record.expires_on),
        "elements": element_rows(record.elements),
        "origin": ({"run_id": record.origin_run_id, "output_id": record.origin_output_id}
                   if record.origin_output_id is not None else None),
        **_lifecycle(record),
    }


def component_source(component) -> dict[str, Any] | None:
    """Where a prepared mixture's component came from: the stock or mixture, the amount drawn and the
    element masses (µg) it carried; None for a component of a solution received ready-made."""
    if component.amount_text is None:
        return None
    return {"stock_id": component.source_stock_id, "mixture_id": component.source_mixture_id,
            "amount": component.amount_text, "element_mass_ug": dict(sorted((component.element_mass_ug or {}).items()))}


def mixture(record: Mixture) -> dict[str, Any]:
    volume_ml = record.volume_ul / 1000
    return {
        "id": record.id,
        "label": record.label,
        "name": record.name,
        "lab_id": record.lab_id,
        "location_id": record.location_id,
        "volume": record.volume_text,
        "volume_ml": volume_ml,
        "density_g_per_ml": record.density_g_per_ml,
        "prepared_on": _ts(record.prepared_on),
        "expires_on": _ts(record.expires_on),
        "received_as_solution": record.received_as_solution,
        "components": [
            {
                "substance_id": c.substance_id,
                "substance": c.substance.name,
                "formula": c.substance.formula,
                "molarity": c.molarity_text,
                "mass_fraction": c.mass_fraction,
                "volume_fraction": c.volume_fraction,
                "source": component_source(c),
            }
            for c in record.components
        ],
        "elements": [
            {**row, "mg_per_ml": (row["mass_ug"] / 1000 / volume_ml) if volume_ml else None}
            for row in element_rows(record.elements)
        ],
        **_lifecycle(record),
    }


def movement(record: StockMovement) -> dict[str, Any]:
    """A stock movement: the amount in the stock's unit and the exact element masses (µg) that left it."""
    return {
        "id": record.id,
        "stock_id": record.stock_id,
        "kind": record.kind,
        "amount": record.amount_text,
        "quantity_micro": record.quantity_micro,
        "elements": element_rows_from(dict(sorted(record.element_mass_ug.items()))),
        "waste_entry_id": record.waste_entry_id,
        "to_stock_id": record.to_stock_id,
        "destination": record.destination,
        "note": record.note,
        "actor_id": record.actor_id,
        "at": _ts(record.at),
    }


def substance_facts(record: Substance) -> dict[str, Any]:
    """What a printed document shows of a substance: identity, state, flash point, hazard and flags."""
    return {"key": record.key, "name": record.name, "formula": record.formula, "cas": record.cas,
            "state": record.state, "flash_point_c": record.flash_point_c, "hazard": record.hazard or {},
            "flags": list(record.flags or ())}


def lab_heading(record: Lab) -> dict[str, Any]:
    """A lab as a document's heading names it."""
    return {"id": record.id, "code": record.code, "name": record.name}


def location_heading(record: Location | None) -> dict[str, Any]:
    """Where a container stands, as a manifest names it ({} if the location is gone)."""
    return {"building": record.building, "room": record.room, "storage": record.storage} if record else {}


def finding(record) -> dict[str, Any]:
    """A rule finding as JSON: Decimals as numbers, the suggested code as a plain object."""
    out = {field.name: getattr(record, field.name) for field in dataclasses.fields(record)}  # plain values: no deep copy
    code = record.suggested_code
    out["suggested_code"] = code.model_dump() if code is not None else None
    out["threshold_value"] = float(record.threshold_value)
    return out


_DUMPERS = {Lab: lab, Location: location, Substance: substance, Stock: stock, Mixture: mixture}


def dump(record) -> dict[str, Any]:
    """The JSON form of any inventory record."""
    return _DUMPERS[type(record)](record)
