"""Runs: batches made under approved procedures, their draws, outputs, losses and balance."""

from __future__ import annotations

from decimal import Decimal

from sqlalchemy import select
from sqlalchemy.orm import Session, object_session

from service.errors import Blocked, Conflict, NotFound
from service.rules import LayeredRules, evaluate
from service.schemas import DrawIn, LossIn, OutputIn, ProductStockIn, RunIn
from service.store import inventory, procedures
from service.store.amounts import assay_masses_ug, element_masses_ug
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

__all__ = ["list_runs", "start_run", "add_output", "add_loss", "flows_of", "balance_of",
           "remaining_ug", "close_run", "lab_filter", "output_element_masses", "stock_output"]


def _take(session: Session, body: DrawIn, run: Run, field: str) -> RunDraw:
    """Take the draw out of the stock or mixture (locked); refuse a draw larger than it holds."""
    model, kind = (Stock, "stock") if body.stock_id else (Mixture, "mixture")
    # Lock only the stock's own row: PostgreSQL refuses FOR UPDATE on the outer-joined substance.
    source = inventory.reference(session, model, body.stock_id or body.mixture_id, f"{field}.{kind}_id",
                                 lab_id=run.lab_id, lock=True)
    taken = inventory.draw_from(source, body.amount, f"{field}.amount", change="drawn_by_run", run=run)
    return RunDraw(stock_id=body.stock_id, mixture_id=body.mixture_id, amount_text=body.amount,
                   element_mass_ug=taken.element_mass_ug)


def _planned(proc: Procedure, scale: float) -> list[DrawIn]:
    return [DrawIn(stock_id=draw.stock_id, mixture_id=draw.mixture_id,
                   amount=procedures.scaled_amount(draw.amount_text, scale)) for draw in proc.draws]


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
    run.draws = [_take(session, d, run, f"draws[{i}]") for i, d in enumerate(draws)]
    session.add(run)
    session.flush()
    return run


def _open(run: Run) -> None:
    """Lock the run's row (re-read) for the rest of the transaction and refuse a closed run: a run's
    outputs, losses, waste entries by share and its closing then never race one another."""
    session = object_session(run)
    session.scalar(select(Run).where(Run.id == run.id).with_for_update(of=Run)
                   .execution_options(populate_existing=True))
    if run.state != "open":
        raise Conflict(f"run {run.id} is closed")


def add_output(session: Session, run: Run, body: OutputIn) -> RunOutput:
    _open(run)
    if body.method == "by_difference" and any(o.method == "by_difference" for o in run.outputs):
        raise Conflict(f"run {run.id} has a by-difference output already; only one output takes the remainder",
                       "method", body.method)
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
        masses, basis = assay_masses_ug(body.assays), {"assays": [a.model_dump() for a in body.assays]}
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
    carried = sorted({s for draw in run.draws for s, ug in draw.element_mass_ug.items() if ug})
    remainder_taken = False
    for out in run.outputs:
        masses = out.element_mass_ug
        if out.method == "by_difference" and not remainder_taken:
            # What the balance leaves of every element the run's draws carried (one such output per run).
            masses, remainder_taken = {s: 0 for s in carried}, True
        flows.append(Flow(label=out.label, kind="product", element_mass_ug=masses, method=out.method,
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


def remaining_ug(session: Session, run: Run, elements: tuple[str, ...]) -> dict[str, int]:
    """Per followed element, what the run's balance leaves for further waste entries, in µg.

    From :func:`balance_of` (``remaining_ug`` of each element row; the tolerance does not enter
    it); an element in no flow of the run has 0 left.
    """
    balance = balance_of(session, run, Decimal(0), elements)
    return {symbol: 0 for symbol in elements} | {row.element: row.remaining_ug for row in balance.elements}


def close_run(session: Session, run: Run, tolerance_fraction: Decimal, elements: tuple[str, ...]) -> tuple[Run, object]:
    """Close the run if its balance closes within the tolerance; else Conflict with the balance."""
    _open(run)
    balance = balance_of(session, run, tolerance_fraction, elements)
    if not balance.closes:
        raise UnbalancedRun(balance)
    run.state, run.closed_at = "closed", utcnow()
    session.flush()
    return run, balance


def output_element_masses(session: Session, run: Run, output: RunOutput, elements: tuple[str, ...]) -> dict[str, int]:
    """The element masses (µg) of one output: as measured, assayed or estimated; for the by-difference
    output, what the run's balance of ``elements`` assigns it (the remainder of each, never below zero)."""
    if output.method != "by_difference":
        return dict(output.element_mass_ug)
    from service.balance import run_balance

    carried = tuple(sorted({s for draw in run.draws for s, ug in draw.element_mass_ug.items() if ug and s in elements}))
    flows = flows_of(session, run, carried)
    balance = run_balance(flows, tolerance_fraction=Decimal(0))
    others = [f for f in flows if f.kind == "product" and not f.by_difference]
    return {s: balance.element(s).product_ug - sum(f.element_mass_ug.get(s, 0) for f in others)
            for s in carried if any(s == row.element for row in balance.elements)}


def stock_output(session: Session, run: Run, output_id: int, body: ProductStockIn, elements: tuple[str, ...]) -> Stock:
    """Put a run's output into the inventory as a stock of the run's lab, holding exactly the output's element masses
    (``elements``: those the balance follows, for a by-difference output).

    An output becomes at most one stock (Conflict); a by-difference output only once its run is closed, when
    the remainder it takes is final.
    """
    output = session.scalar(select(RunOutput).where(RunOutput.id == output_id, RunOutput.run_id == run.id)
                            .with_for_update())
    if output is None:
        raise NotFound(f"output of run {run.id}", output_id)
    existing = session.scalar(select(Stock).where(Stock.origin_output_id == output.id))
    if existing is not None:
        raise Conflict(f"output {output.id} is stock {existing.label} already; an output becomes one stock",
                       "output_id", output.id)
    if output.method == "by_difference" and run.state != "closed":
        raise Conflict(f"run {run.id} is open; a by-difference output's content is final once the run is closed",
                       "output_id", output.id)
    return inventory.create_product_stock(
        session, label=body.label, amount=body.amount, location_id=body.location_id, substance_id=body.substance_id,
        lab_id=run.lab_id, run_id=run.id, output_id=output.id, masses_ug=output_element_masses(session, run, output, elements))


class UnbalancedRun(Conflict):
    def __init__(self, balance) -> None:
        super().__init__("the mass balance does not close within the site tolerance")
        self.balance = balance


def lab_filter(scope: set[int] | None, lab_id: int | None) -> set[int] | None:
    """The labs a listing covers: the caller's ``scope`` (None: every lab), narrowed to ``lab_id`` if asked."""
    if lab_id is None:
        return scope
    return {lab_id} & scope if scope is not None else {lab_id}


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
