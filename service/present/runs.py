"""A run as people see it: draws, outputs, losses and, for one record, its mass balance."""

from __future__ import annotations

from flask import current_app

from service.present.serialize import element_rows_from
from service.store import runs
from service.store.db import get_session
from service.store.models import Run

__all__ = ["CAUTION", "balance_tolerance", "balance_elements", "dump_balance", "dump_run"]

CAUTION = ("The balance is a record for the lab's own use; estimated outputs carry the uncertainty of their "
           "method. Waste classification rests with the site safety officer and local regulations.")


def balance_tolerance():
    """The fraction of each element's input a run may leave unaccounted (``BALANCE_TOLERANCE``)."""
    return current_app.config["BALANCE_TOLERANCE"]


def balance_elements():
    """The elements the mass balance follows (``BALANCE_ELEMENTS``)."""
    return current_app.config["BALANCE_ELEMENTS"]


def dump_balance(balance) -> dict:
    return {"closes": balance.closes, "tolerance_percent": float(balance_tolerance()) * 100,
            "elements": balance.to_rows(), "caution": CAUTION}


def dump_run(run: Run, *, with_balance: bool = True) -> dict:
    out = {
        "id": run.id, "procedure_id": run.procedure_id, "lab_id": run.lab_id, "researcher_id": run.researcher_id,
        "scale": run.scale, "state": run.state, "note": run.note, "started_at": run.started_at.isoformat(),
        "closed_at": run.closed_at.isoformat() if run.closed_at else None,
        "draws": [{"stock_id": d.stock_id, "mixture_id": d.mixture_id, "amount": d.amount_text,
                   "elements": element_rows_from(d.element_mass_ug)} for d in run.draws],
        "outputs": [{"id": o.id, "label": o.label, "method": o.method, "description": o.description,
                     "relative_uncertainty": o.relative_uncertainty, "basis": o.basis,
                     "elements": element_rows_from(o.element_mass_ug)} for o in run.outputs],
        "losses": [{"id": loss.id, "description": loss.description, "elements": element_rows_from(loss.element_mass_ug)}
                   for loss in run.losses],
    }
    if with_balance:
        out["balance"] = dump_balance(runs.balance_of(get_session(), run, balance_tolerance(), balance_elements()))
    return out
