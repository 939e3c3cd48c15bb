"""Runs: batches made under approved procedures, their draws, outputs, losses and balance."""

from __future__ import annotations

from decimal import Decimal

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.chem.content import round_ug
from service.chem.units import parse_quantity, to_decimal
from service.errors import Blocked, Conflict
from service.rules import LayeredRules, evaluate
from service.schemas import DrawIn, LossIn, OutputIn, RunIn
from service.store import inventory, procedures
from service.store.paging import Page, paginate
from service.store.models import (
    Mixture,
    Procedure,
    Run,
    RunDraw,
    RunLoss,
    RunOutput,
    Stock,
    User,
    WasteContainer,
    WasteEntry,
    utcnow,
)
from service.store.waste import element_masses_ug

__all__ = ["list_runs", "start_run", "add_output", "add_loss", "flows_of", "balance_of", "close_run"]


def _take(session: Session, body: DrawIn, lab_id: int, field: str) -> RunDraw:
    """Draw from the run lab's stock or mixture (row-locked); refused beyond what it holds."""
    model, kind = (Stock, "stock") if body.stock_id else (Mixture, "mixture")
    # Lock only the stock's own row: PostgreSQL refuses FOR UPDATE on the outer-joined substance.
    source = inventory.reference(session, model, body.stock_id or body.mixture_id, f"{field}.{kind}_id",
                                 lab_id=lab_id, lock=True)
    masses = inventory.draw_from(source, body.amount, f"{field}.amount")
    return RunDraw(stock_id=body.stock_id, mixture_id=body.mixture_id, amount_text=body.amount, element_mass_ug=masses)


def _planned(proc: Procedure, scale: float) -> list[DrawIn]:
    out = []
    for draw in proc.draws:
        quantity = parse_quantity(draw.amount_text)
        amount = f"{Decimal(repr(float(quantity.magnitude))) * Decimal(repr(scale))} {quantity.units:~}"
        out.append(DrawIn(stock_id=draw.stock_id, mixture_id=draw.mixture_id, amount=amount))
    return out


def start_run(session: Session, body: RunIn, actor: User, rules: LayeredRules) -> Run:
    """Start a run of an approved procedure at ``body.scale`` (at most the approved scale)."""
    proc = inventory.reference(session, Procedure, body.procedure_id, "procedure_id", active=False)
    if proc.state != "approved":
        raise Conflict(f"procedure {proc.id} is {proc.state.replace('_', ' ')}; only approved procedures are run",
                       "procedure_id", proc.id)
    if body.scale > proc.scale:
        subject = procedures.subject_of(proc, scale=body.scale, approved_scale=proc.scale)
        raise Blocked(f"scale {body.scale:g} is beyond the approved scale {proc.scale:g}; "
                      "register a revision for the larger scale", evaluate(rules, "procedure", subject))
    run = Run(procedure_id=proc.id, lab_id=proc.lab_id, researcher_id=actor.id, scale=body.scale, note=body.note,
              state="open", started_at=utcnow())
    draws = body.draws if body.draws is not None else _planned(proc, body.scale)
    run.draws = [_take(session, d, proc.lab_id, f"draws[{i}]") for i, d in enumerate(draws)]
    session.add(run)
    session.flush()
    return run


def _open(run: Run) -> None:
    if run.state != "open":
        raise Conflict(f"run {run.id} is closed")


def add_output(session: Session, run: Run, body: OutputIn) -> RunOutput:
    _open(run)
    uncertainty = None
    if body.estimate is not None:
        from service import estimates

        result = estimates.estimate(body.estimate)
        masses = estimates.masses_ug(result)
        uncertainty = result.relative_uncertainty
        basis = {"estimate": body.estimate.model_dump(), "core_diameter_nm": result.core_diameter_nm,
                 "outer_diameter_nm": result.outer_diameter_nm,
                 "relative_uncertainty_by_element": dict(result.relative_uncertainty_by_element)}
    elif body.assays:
        masses = {}
        for i, assay in enumerate(body.assays):
            c = to_decimal(parse_quantity(assay.concentration, field=f"assays[{i}].concentration"), "ug/mL")
            v = to_decimal(parse_quantity(assay.volume, expect="volume", field=f"assays[{i}].volume"), "mL")
            masses[assay.element] = masses.get(assay.element, 0) + round_ug(c * v)
        basis = {"assays": [a.model_dump() for a in body.assays]}
    else:
        masses, basis = element_masses_ug(body.elements), {}
    output = RunOutput(label=body.label, method=body.method, description=body.description, element_mass_ug=masses,
                       relative_uncertainty=uncertainty, basis=basis)
    run.outputs.append(output)
    session.flush()
    return output


def add_loss(session: Session, run: Run, body: LossIn) -> RunLoss:
    _open(run)
    loss = RunLoss(description=body.description, element_mass_ug=element_masses_ug(body.elements))
    run.losses.append(loss)
    session.flush()
    return loss


def flows_of(session: Session, run: Run, elements: tuple[str, ...]) -> list:
    """The run's inputs, products, waste entries and losses as balance flows, for ``elements`` only."""
    from service.balance import Flow as _Flow

    def Flow(*, element_mass_ug, **kw):  # noqa: N802 - keeps the tracked elements only
        return _Flow(element_mass_ug={s: ug for s, ug in element_mass_ug.items() if s in elements}, **kw)

    flows = []
    for draw in run.draws:
        source = session.get(Stock, draw.stock_id) if draw.stock_id else session.get(Mixture, draw.mixture_id)
        flows.append(Flow(label=f"{source.label} {draw.amount_text}", kind="input", element_mass_ug=draw.element_mass_ug))
    for out in run.outputs:
        flows.append(Flow(label=out.label, kind="product", element_mass_ug=out.element_mass_ug, method=out.method,
                          relative_uncertainty=out.relative_uncertainty))
    entries = session.execute(select(WasteEntry, WasteContainer.label).join(WasteContainer)
                              .where(WasteEntry.run_id == run.id).order_by(WasteEntry.id)).all()
    for entry, label in entries:
        flows.append(Flow(label=f"{label} entry {entry.id}", kind="waste",
                          element_mass_ug={e.element: e.mass_ug for e in entry.elements}))
    for loss in run.losses:
        flows.append(Flow(label=loss.description, kind="loss", element_mass_ug=loss.element_mass_ug))
    return flows


def balance_of(session: Session, run: Run, tolerance_fraction: Decimal, elements: tuple[str, ...]):
    from service.balance import run_balance

    return run_balance(flows_of(session, run, elements), tolerance_fraction=tolerance_fraction)


def close_run(session: Session, run: Run, tolerance_fraction: Decimal, elements: tuple[str, ...]) -> tuple[Run, object]:
    """Close the run if its balance closes within the tolerance; else Conflict with the balance."""
    _open(run)
    balance = balance_of(session, run, tolerance_fraction, elements)
    if not balance.closes:
        raise UnbalancedRun(balance)
    run.state, run.closed_at = "closed", utcnow()
    session.flush()
    return run, balance


class UnbalancedRun(Conflict):
    def __init__(self, balance) -> None:
        super().__init__("the mass balance does not close within the site tolerance")
        self.balance = balance


def list_runs(session: Session, *, lab_ids: set[int] | None = None, procedure_id: int | None = None,
              researcher_id: int | None = None, state: str | None = None,
              limit: int | None = None, offset: int = 0) -> Page:
    """A page of runs in id order, optionally for some labs, of one procedure, one researcher or in one state."""
    query = select(Run).order_by(Run.id)
    if researcher_id is not None:
        query = query.where(Run.researcher_id == researcher_id)
    if state is not None:
        query = query.where(Run.state == state)
    if lab_ids is not None:
        query = query.where(Run.lab_id.in_(sorted(lab_ids)))
    if procedure_id is not None:
        query = query.where(Run.procedure_id == procedure_id)
    return paginate(session, query, limit, offset)
