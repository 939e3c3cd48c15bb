"""A run as people see it: draws, outputs, losses and, for one record, its mass balance."""

from __future__ import annotations

from flask import current_app

from service.present.charts import bar_chart
from service.present.serialize import element_rows_from
from service.store import runs
from service.store.db import get_session
from service.store.models import Run

__all__ = ["CAUTION", "BALANCE_PARTS", "balance_tolerance", "balance_elements", "balance_charts", "dump_balance",
           "dump_run"]

# The rows of a balance chart: (label, key of the balance row); the last is what the tolerance judges.
BALANCE_PARTS = (("input", "input_ug"), ("product", "product_ug"), ("waste", "waste_ug"), ("losses", "losses_ug"),
                 ("unaccounted", "unaccounted_ug"))

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


def _mg(value) -> str:
    return f"{value:,.3f}"


def balance_charts(balance: dict) -> list[dict]:
    """One chart per element of a dumped balance (:func:`dump_balance`): its input against product,
    waste, losses and unaccounted, in mg on the element's own scale, with the tolerance drawn either
    side of 0 (the band the unaccounted part must stay within). Returns {"row", "chart"} per element."""
    percent = balance["tolerance_percent"]
    out = []
    for row in balance["elements"]:
        band_mg = row["tolerance_ug"] / 1000
        chart = bar_chart(
            f"{row['element']}: input against where it went (mg)", [label for label, _ in BALANCE_PARTS],
            {row["element"]: [row[key] / 1000 for _, key in BALANCE_PARTS]}, "mg",
            marks=[("", -band_mg), (f"tolerance ±{percent:g} %", band_mg)], number=_mg,
            chart_id=f"balance-{row['element']}")
        out.append({"row": row, "chart": chart})
    return out
