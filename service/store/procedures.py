"""Procedures: registration, revisions, the approval workflow and what the rules see.

The rule evaluation itself is pure (``service.rules``); this module turns a stored
procedure into a :class:`ProcedureSubject` and moves procedures between states.
"""

from __future__ import annotations

from decimal import Decimal
from typing import Iterable, Optional

from sqlalchemy import select
from sqlalchemy.orm import Session, selectinload

from service import vocab
from service.chem.units import QuantityError, exact_micro, parse_quantity
from service.errors import Blocked, Conflict, Forbidden, InvalidInput
from service.rules import LayeredRules, evaluate, highest_level
from service.rules.subjects import ProcedureSubject, ReagentFacts, StepFacts
from service.schemas import PlannedDrawIn, ProcedureIn, ProcedurePatch, StepIn, WastePlanIn
from service.store import inventory
from service.store.paging import Page, paginate
from service.store.findings import evaluate_once
from service.store.models import (
    Lab,
    Mixture,
    Procedure,
    ProcedureDecision,
    ProcedureStep,
    ReagentDraw,
    Stock,
    User,
    WastePlanItem,
    utcnow,
)

__all__ = [
    "TRANSITIONS",
    "create_procedure",
    "unsaved_procedure",
    "update_procedure",
    "subject_of",
    "scaled_amount",
    "element_totals_ug",
    "findings_of",
    "last_approved_scale",
    "transition",
    "may_act",
    "review_queue",
    "decisions_of",
    "list_procedures",
    "preview",
    "highest_level",
]

# action -> (states it may start from, state it leads to, comment required)
TRANSITIONS: dict[str, tuple[frozenset[str], str, bool]] = {
    "submit": (frozenset({"draft", "changes_requested"}), "submitted", False),
    "approve": (frozenset({"submitted"}), "approved", False),  # required when a finding needs review
    "request_changes": (frozenset({"submitted"}), "changes_requested", True),
    "decline": (frozenset({"submitted"}), "declined", True),
    "retire": (frozenset({"approved"}), "retired", False),
    "withdraw": (frozenset({"submitted"}), "draft", False),  # back to the author before a decision
}
# Roles that may withdraw any submitted procedure they can see (others only their own).
WITHDRAW_ANY = frozenset({"lab_manager", "admin"})
EDITABLE = frozenset({"draft", "changes_requested"})
_SEVERITY = {level: rank for rank, level in enumerate(vocab.FINDING_LEVELS)}  # note 0 … block 3


# --- building -----------------------------------------------------------------


def _draw(session: Session, lab_id: int, position: int, body: PlannedDrawIn) -> ReagentDraw:
    field = f"draws[{position}]"
    model, kind = (Stock, "stock") if body.stock_id is not None else (Mixture, "mixture")
    source = inventory.reference(session, model, body.stock_id or body.mixture_id, f"{field}.{kind}_id", lab_id=lab_id)
    # parsed once, here: reads take the stored kind and exact amount
    amount_kind, amount_micro = exact_micro(parse_quantity(body.amount, expect=("mass", "volume") if kind == "stock"
                                                           else "volume", field=f"{field}.amount"))
    draw = ReagentDraw(position=position, stock_id=body.stock_id, mixture_id=body.mixture_id, amount_text=body.amount,
                       amount_kind=amount_kind, amount_micro=amount_micro, step=body.step)
    draw.stock, draw.mixture = (source, None) if kind == "stock" else (None, source)
    try:
        _reagent(draw, 1.0, field)  # checks the amount now: density
    except QuantityError as exc:
        if exc.field and exc.field.startswith(field):
            raise
        raise QuantityError(exc.text, exc.reason, f"{field}.amount") from exc  # name the draw, not just "amount"
    return draw


def _fill(session: Session, proc: Procedure, steps: list[StepIn] | None, draws: list[PlannedDrawIn] | None,
          waste: list[WastePlanIn] | None) -> None:
    if steps is not None:
        proc.steps = [ProcedureStep(position=i, **s.model_dump()) for i, s in enumerate(steps)]
    if draws is not None:
        proc.draws = [_draw(session, proc.lab_id, i, d) for i, d in enumerate(draws)]
    for draw in proc.draws:
        if draw.step is not None and draw.step >= len(proc.steps):
            count = len(proc.steps)
            raise InvalidInput(f"draws[{draw.position}].step", f"no step at position {draw.step}: the procedure has "
                               f"{count} steps (positions 0 to {count - 1}, shown as steps 1 to {count})", draw.step)
    if waste is not None:
        proc.waste_plan = [WastePlanItem(position=i, **w.model_dump()) for i, w in enumerate(waste)]


def _built(session: Session, body: ProcedureIn, researcher_id: Optional[int],
           family_id: Optional[int] = None) -> Procedure:
    """A draft built from ``body`` with every reference checked, not yet in the session."""
    lab = session.get(Lab, body.lab_id)
    if lab is None or lab.retired_at is not None:
        raise InvalidInput("lab_id", f"no active lab with id {body.lab_id}", body.lab_id)
    proc = Procedure(lab_id=lab.id, researcher_id=researcher_id, title=body.title, summary=body.summary,
                     scale=body.scale, state="draft", revision=1, family_id=family_id)
    _fill(session, proc, body.steps, body.draws, body.waste_plan)
    return proc


def create_procedure(session: Session, body: ProcedureIn, researcher: User) -> Procedure:
    """Register a new procedure (revision 1, draft) for ``researcher``."""
    proc = _built(session, body, researcher.id)
    session.add(proc)
    session.flush()
    proc.family_id = proc.id
    session.flush()
    return proc


def unsaved_procedure(session: Session, body: ProcedureIn, *, family_id: Optional[int] = None) -> Procedure:
    """The draft ``body`` describes, checked like :func:`create_procedure` but never added to the session.

    For judging input before it is saved (``preview``, ``subject_of``): nothing is flushed, so nothing
    is stored and the audit trail records nothing. ``family_id`` names the procedure being edited, so
    a scale-up is measured against its approved revisions.
    """
    with session.no_autoflush:
        return _built(session, body, None, family_id)


def update_procedure(session: Session, proc: Procedure, patch: ProcedurePatch) -> tuple[Procedure, bool]:
    """Edit a draft in place, or make a new draft revision of an approved procedure.

    Returns the procedure and whether it is a new revision. Other states refuse edits.
    """
    values = patch.model_dump(exclude_unset=True)
    if proc.state == "approved":
        proc = _new_revision(session, proc)
        created = True
    elif proc.state in EDITABLE:
        created = False
    else:
        raise Conflict(f"a {proc.state} procedure cannot be edited", "state", proc.state)
    for key in ("title", "summary", "scale"):
        if key in values:
            setattr(proc, key, values[key])
    _fill(session, proc, patch.steps if "steps" in values else None, patch.draws if "draws" in values else None,
          patch.waste_plan if "waste_plan" in values else None)
    session.flush()
    return proc, created


def _new_revision(session: Session, old: Procedure) -> Procedure:
    latest = session.scalar(select(Procedure.revision).where(Procedure.family_id == old.family_id)
                            .order_by(Procedure.revision.desc()).limit(1))
    if session.scalar(select(Procedure.id).where(Procedure.family_id == old.family_id,
                                                 Procedure.state.in_(("draft", "submitted", "changes_requested")))):
        raise Conflict("this procedure already has an open revision; edit that one", "state", old.state)
    new = Procedure(family_id=old.family_id, revision=latest + 1, revision_of_id=old.id, lab_id=old.lab_id,
                    researcher_id=old.researcher_id, title=old.title, summary=old.summary, scale=old.scale,
                    state="draft")
    new.steps = [ProcedureStep(position=s.position, operation=s.operation, temperature_c=s.temperature_c,
                               atmosphere=s.atmosphere, duration_min=s.duration_min, note=s.note) for s in old.steps]
    new.draws = [ReagentDraw(position=d.position, stock_id=d.stock_id, mixture_id=d.mixture_id,
                             amount_text=d.amount_text, amount_kind=d.amount_kind, amount_micro=d.amount_micro,
                             step=d.step, stock=d.stock, mixture=d.mixture)
                 for d in old.draws]
    new.waste_plan = [WastePlanItem(position=w.position, stream=w.stream, contents=w.contents,
                                    expected_amount=w.expected_amount) for w in old.waste_plan]
    session.add(new)
    session.flush()
    return new


# --- what the rules see -------------------------------------------------------


def scaled_amount(amount_text: str, scale: float) -> str:
    """The amount text × ``scale``, exact (Decimal), in the amount's own unit.

    Element masses are computed from the scaled amount, so they are rounded to µg once: a
    preview at a scale shows what a run at that scale draws.

    >>> scaled_amount("15.8 mg", 5)
    '79.00 mg'
    """
    quantity = parse_quantity(amount_text)
    return f"{Decimal(repr(float(quantity.magnitude))) * Decimal(repr(float(scale)))} {quantity.units:~}"


def _reagent(draw: ReagentDraw, scale: float, field: str = "draws") -> ReagentFacts:
    # the amount as stored when the draw was written (no text parsed), × scale exactly
    micro = draw.amount_micro if scale == 1 else draw.amount_micro * Decimal(repr(float(scale)))
    masses = inventory.source_element_masses(draw.stock, draw.mixture, (draw.amount_kind, micro), f"{field}.amount")
    if draw.stock is not None:
        stock, substance = draw.stock, draw.stock.substance
        classes = (substance.hazard or {}).get("classes", [])
        name, state = substance.name, substance.state
        if inventory.is_product(stock):  # a run's product: named by its stock; a dispersion when kept by volume
            name = f"{substance.name} ({stock.label}, product of run {stock.origin_run_id})"
            state = "solution" if stock.quantity_kind == "volume" else state
        return ReagentFacts(
            name=name, amount_text=draw.amount_text, state=state,
            element_mass_ug=masses, flags=frozenset(substance.flags or ()),
            carcinogen_category=next((c.split(" ", 1)[1] for c in classes if c.startswith("Carc. ")), None),
            flash_point_c=substance.flash_point_c,
            flammable="flammable" in (substance.flags or ()) and substance.state == "liquid", step=draw.step,
        )
    mixture = draw.mixture
    parts = [c.substance for c in mixture.components]
    liquids = [p for p in parts if p.state == "liquid"]
    flash = [p.flash_point_c for p in liquids if p.flash_point_c is not None]
    categories = sorted(c.split(" ", 1)[1] for p in parts for c in (p.hazard or {}).get("classes", [])
                        if c.startswith("Carc. "))
    return ReagentFacts(
        name=mixture.name, amount_text=draw.amount_text, state="solution", element_mass_ug=masses,
        flags=frozenset(f for p in parts for f in (p.flags or ())),
        carcinogen_category=categories[0] if categories else None,
        flash_point_c=min(flash) if flash else None,
        flammable=any("flammable" in (p.flags or ()) for p in liquids), step=draw.step,
    )


# session.info cache: family id -> [(revision, id, scale)] of its approved (or since retired) revisions.
# Filled set-wise by the list functions so that a list's findings need no query per procedure;
# dropped by every transition.
_APPROVED = "dotledger.procedures.approved_revisions"


def _load_approved_revisions(session: Session, family_ids) -> dict[int, list[tuple[int, int, float]]]:
    cache = session.info.setdefault(_APPROVED, {})
    missing = sorted({f for f in family_ids if f is not None} - cache.keys())
    if missing:
        for family_id in missing:
            cache[family_id] = []
        rows = session.execute(select(Procedure.family_id, Procedure.revision, Procedure.id, Procedure.scale)
                               .where(Procedure.family_id.in_(missing), Procedure.decided_at.is_not(None),
                                      Procedure.state.in_(("approved", "retired"))))
        for family_id, revision, ident, scale in rows:
            cache[family_id].append((revision, ident, scale))
    return cache


def last_approved_scale(session: Session, proc: Procedure) -> Optional[float]:
    """The scale of the newest approved (or since retired) earlier revision, or None."""
    if proc.family_id is None:
        return None
    earlier = [row for row in _load_approved_revisions(session, [proc.family_id])[proc.family_id] if row[1] != proc.id]
    return max(earlier)[2] if earlier else None


def subject_of(proc: Procedure, *, scale: Optional[float] = None, approved_scale: Optional[float] = None,
               reagents: Optional[tuple[ReagentFacts, ...]] = None) -> ProcedureSubject:
    """The facts the rules evaluate, at the procedure's scale or another one (``reagents``: those of
    another subject of the same procedure at the same scale, not computed again)."""
    scale = proc.scale if scale is None else scale
    return ProcedureSubject(
        title=proc.title,
        reagents=tuple(_reagent(d, scale) for d in proc.draws) if reagents is None else reagents,
        steps=tuple(StepFacts(position=s.position, operation=s.operation, temperature_c=s.temperature_c,
                              atmosphere=s.atmosphere, duration_min=s.duration_min) for s in proc.steps),
        scale=scale,
        last_approved_scale=approved_scale,
    )


def element_totals_ug(subject: ProcedureSubject) -> dict[str, int]:
    totals: dict[str, int] = {}
    for reagent in subject.reagents:
        for symbol, ug in reagent.element_mass_ug.items():
            totals[symbol] = totals.get(symbol, 0) + ug
    return dict(sorted(totals.items()))


def reference_scale(session: Session, proc: Procedure) -> Optional[float]:
    """The approved scale a scale-up is measured against: its own once approved, else the last approved revision's."""
    if proc.state in ("approved", "retired") and proc.decided_at is not None:
        return proc.scale
    return last_approved_scale(session, proc)


def findings_of(session: Session, proc: Procedure, rules: LayeredRules, *, scale: Optional[float] = None,
                reagents: Optional[tuple[ReagentFacts, ...]] = None) -> list:
    """The findings at ``scale`` (default the procedure's); ``reagents`` as :func:`subject_of` takes them."""
    subject = subject_of(proc, scale=scale, approved_scale=reference_scale(session, proc), reagents=reagents)
    return evaluate_once(session, rules, "procedure", (proc.id, scale), subject)


# --- workflow -----------------------------------------------------------------


def may_act(proc: Procedure, action: str, actor: User) -> Optional[str]:
    """Why ``actor`` may not take ``action`` on ``proc`` because of who they are, or None.

    The role matrix (service.permissions) decides which roles take an action at all; this is
    the rule about the procedure's own author: nobody approves their own procedure, and a
    researcher withdraws only their own.
    """
    own = proc.researcher_id == actor.id
    if action == "approve" and own:
        return "nobody approves their own procedure"
    if action == "withdraw" and not own and actor.role not in WITHDRAW_ANY:
        return "only its researcher, a lab manager or an administrator withdraws a procedure"
    return None


def transition(session: Session, proc: Procedure, action: str, actor: User, comment: Optional[str],
               rules: LayeredRules) -> Procedure:
    """Move ``proc`` by ``action`` (see TRANSITIONS), recording the decision.

    Raises Conflict for a wrong state, Blocked for block findings on submit or
    approve, Forbidden for approving one's own procedure or withdrawing another researcher's
    (``may_act``), InvalidInput for a missing comment.
    """
    starts, target, needs_comment = TRANSITIONS[action]
    if proc.state not in starts:
        raise Conflict(f"cannot {action.replace('_', ' ')} a procedure that is {proc.state.replace('_', ' ')}",
                       "state", proc.state)
    refused = may_act(proc, action, actor)
    if refused:
        raise Forbidden(refused, {"procedure_id": proc.id})
    findings = findings_of(session, proc, rules)
    level = highest_level(findings)
    comment = (comment or "").strip() or None
    if action in ("submit", "approve") and level == "block":
        blocking = [f for f in findings if f.level == "block"]
        raise Blocked(f"{len(blocking)} finding(s) block this procedure; change it first", findings)
    if action == "approve" and level == "review" and not comment:
        needs_comment = True
    if needs_comment and not comment:
        raise InvalidInput("comment", f"a comment is required to {action.replace('_', ' ')} this procedure")
    now = utcnow()
    session.add(ProcedureDecision(procedure_id=proc.id, actor_id=actor.id, from_state=proc.state, to_state=target,
                                  comment=comment, highest_level=level, at=now))
    if action == "submit":
        proc.submitted_at = now
    elif action == "withdraw":
        proc.submitted_at = None  # a draft again; the decision row keeps when it was submitted
    elif action in ("approve", "request_changes", "decline"):
        proc.decided_at, proc.decided_by_id, proc.decision_comment = now, actor.id, comment
    if action == "approve":
        for older in session.scalars(select(Procedure).where(Procedure.family_id == proc.family_id,
                                                             Procedure.id != proc.id, Procedure.state == "approved")):
            older.state = "retired"  # superseded by this revision
    if action == "retire":
        proc.retired_at = now
    proc.state = target
    session.info.pop(_APPROVED, None)  # which revisions are approved has changed
    session.flush()
    return proc


def review_queue(session: Session, rules: LayeredRules, *, limit: Optional[int] = None,
                 offset: int = 0) -> Page:
    """A page of submitted procedures, oldest submission first, each paired with its highest finding level."""
    procs = paginate(session, select(Procedure).where(Procedure.state == "submitted")
                     .order_by(Procedure.submitted_at, Procedure.id), limit, offset)
    _load_approved_revisions(session, {p.family_id for p in procs})  # for their findings, in one query
    return procs.with_items([(p, highest_level(findings_of(session, p, rules))) for p in procs])


def decisions_of(session: Session, proc: Procedure, *, limit: Optional[int] = None, offset: int = 0) -> Page:
    """A page of the procedure's workflow decisions, oldest first."""
    return paginate(session, select(ProcedureDecision).where(ProcedureDecision.procedure_id == proc.id)
                    .order_by(ProcedureDecision.id), limit, offset)


def list_procedures(session: Session, *, state: Optional[str] = None, lab_id: Optional[int] = None,
                    lab_ids: Optional[set[int]] = None, family_id: Optional[int] = None,
                    researcher_id: Optional[int] = None, states: Optional[Iterable[str]] = None,
                    limit: Optional[int] = 100, offset: int = 0) -> Page:
    """A page of procedures in id order; ``researcher_id`` keeps one researcher's own, ``states`` any of several."""
    query = select(Procedure)
    if state is not None:
        query = query.where(Procedure.state == state)
    if states is not None:
        query = query.where(Procedure.state.in_(sorted(states)))
    if researcher_id is not None:
        query = query.where(Procedure.researcher_id == researcher_id)
    if lab_id is not None:
        query = query.where(Procedure.lab_id == lab_id)
    if lab_ids is not None:
        query = query.where(Procedure.lab_id.in_(sorted(lab_ids)))
    if family_id is not None:
        query = query.where(Procedure.family_id == family_id)
    # the draws' sources once each (a source drawn by many procedures is one row, not one per draw)
    query = query.options(selectinload(Procedure.draws).selectinload(ReagentDraw.stock),
                          selectinload(Procedure.draws).selectinload(ReagentDraw.mixture))
    found = paginate(session, query.order_by(Procedure.id), limit, offset)
    _load_approved_revisions(session, {p.family_id for p in found})  # for their findings, in one query
    return found


def preview(session: Session, proc: Procedure, rules: LayeredRules, scales: list[float]):
    """Per scale: (scale, highest level, element masses per batch, findings)."""
    rows = []
    approved = reference_scale(session, proc)
    for scale in scales:
        subject = subject_of(proc, scale=scale, approved_scale=approved)
        findings = evaluate(rules, "procedure", subject)
        rows.append((scale, highest_level(findings), element_totals_ug(subject), findings))
    return rows
