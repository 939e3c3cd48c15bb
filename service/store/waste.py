"""Waste containers and their append-only entries.

Adding an entry locks the container row for the rest of the transaction (``SELECT … FOR
UPDATE`` on PostgreSQL; a writing session's SQLite transaction begins IMMEDIATE), so two
concurrent additions are both counted or one is refused — never lost. The same transaction
adds the entry to the container's running totals (volume, mass, element masses, components),
so reading a container costs the same at 10 or 100 000 entries.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from decimal import ROUND_HALF_EVEN, Decimal
from functools import cache
from typing import Callable, Optional

from sqlalchemy import bindparam, func, literal, select, update
from sqlalchemy.orm import Session
from sqlalchemy.orm.attributes import set_committed_value

from service import vocab
from service.chem.formula import parse_formula
from service.chem.units import QuantityError, whole_micro
from service.errors import Conflict, InvalidInput
from service.rules.subjects import ContainerComponent, ContainerSubject
from service.chem.content import round_ug
from service.schemas import ContainerIn, DeterminationIn, EntryIn
from service.rules import LayeredRules
from service.store import areas, audit, db, month_totals, runs, sql
from service.store.amounts import assay_ug, element_masses_ug, mass_ug, mg_text
from service.store.inventory import get, reference
from service.store.paging import Page, paginate
from service.store.models import (
    Location,
    Run,
    Substance,
    WasteContainer,
    WasteContainerComponent,
    WasteContainerElement,
    WasteContainerTotals,
    WasteDetermination,
    WasteEntry,
    WasteEntryComponent,
    WasteEntryElement,
    utcnow,
)

__all__ = ["SOLID_STREAMS", "Contents", "EntryCheck", "create_container", "check_entry", "add_entry", "room_text",
           "reverse_entry", "contents_of", "subject_of", "move", "determine", "determination_of", "element_masses_ug",
           "list_containers", "entries_of", "element_history", "elements_held"]

SOLID_STREAMS = frozenset(vocab.SOLID_STREAMS)
_HALOGENS = frozenset({"F", "Cl", "Br", "I"})
# action -> (states it may start from, target state, timestamp attribute)
MOVES = {
    "mark_full": (frozenset({"open"}), "full", "full_at"),
    "request_pickup": (frozenset({"open", "full"}), "pickup_requested", "pickup_requested_at"),
    "collect": (frozenset({"pickup_requested"}), "collected", "collected_at"),
}


def _entry_elements(session: Session, body: EntryIn, run: Optional[Run],
                    balance_elements: tuple[str, ...]) -> list[WasteEntryElement]:
    """The entry's element rows in exact µg, each with the basis it was given on.

    With a run, an element the run balance follows may take at most what that balance (the one
    the run page shows, :func:`service.store.runs.remaining_ug`) still leaves: more is refused
    naming ``elements[i]``. A share is that remainder × percent, rounded to µg once.
    """
    left = runs.remaining_ug(session, run, balance_elements) if run is not None else {}
    rows: list[WasteEntryElement] = []
    for i, row in enumerate(body.elements):
        field = f"elements[{i}]"
        if any(r.element == row.element for r in rows):
            raise InvalidInput(f"{field}.element", f"{row.element} is given twice")
        if row.basis == "share":
            if row.element not in left:
                raise InvalidInput(f"{field}.element", f"the run balance does not follow {row.element} "
                                   f"(it follows {', '.join(balance_elements)}); give a mass or an assay")
            of = left[row.element]
            if of <= 0:
                raise InvalidInput(field, f"the run has no {row.element} left unaccounted ({mg_text(of)}); "
                                   "nothing to take a share of")
            ug = round_ug(Decimal(repr(row.share_percent)) * of / 100)
            basis = {"kind": "share", "percent": row.share_percent, "of_ug": of, "remaining_ug": of - ug}
        elif row.basis == "assay":
            ug = assay_ug(row.assay(), field)
            basis = {"kind": "assay", "concentration": row.concentration, "volume": row.volume}
        else:
            ug = mass_ug(row, field)
            basis = {"kind": "mass", "mass": row.mass}
        if row.element in left and ug > left[row.element]:
            raise InvalidInput(field, f"the run has {mg_text(max(left[row.element], 0))} {row.element} left "
                               f"unaccounted; this entry gives {mg_text(ug)}")
        rows.append(WasteEntryElement(element=row.element, mass_ug=ug, basis=basis))
    return rows


def create_container(session: Session, body: ContainerIn) -> WasteContainer:
    form = "solid" if body.stream in SOLID_STREAMS else "liquid"
    solid = form == "solid"
    micro = whole_micro(body.capacity, "ug" if solid else "uL", expect="mass" if solid else "volume", field="capacity")
    if micro <= 0:
        raise InvalidInput("capacity", "must be above zero")
    reference(session, Location, body.location_id, "location_id", lab_id=body.lab_id)
    if session.scalar(select(WasteContainer.id).where(func.lower(WasteContainer.label) == func.lower(body.label))):
        raise Conflict(f"a waste container labelled {body.label!r} exists", "label", body.label)
    container = WasteContainer(label=body.label, lab_id=body.lab_id, location_id=body.location_id, stream=body.stream,
                               form=form, capacity_text=body.capacity, capacity_micro=micro,
                               acute_hazardous=body.acute_hazardous, state="open",
                               totals=_no_totals())
    session.add(container)
    session.flush()
    areas.forget(session)
    return container


@dataclass(frozen=True)
class Contents:
    volume_ul: int
    mass_ug: int
    element_mass_ug: dict[str, int]
    component_volume_ul: dict[int, int]  # substance id -> µL
    filterable_solids_percent: float
    entries: int
    ph: Optional[float] = None  # last recorded on an entry still standing


def contents_of(session: Session, container: WasteContainer) -> Contents:
    """The container's contents, from its running totals (no sum over the entries)."""
    totals = container.totals or _no_totals()
    volume = totals.volume_ul
    return Contents(volume, totals.mass_ug,
                    {row.element: row.mass_ug for row in sorted(container.element_totals, key=lambda r: r.element)
                     if row.mass_ug},
                    {row.substance_id: row.volume_ul for row in container.component_totals if row.volume_ul},
                    totals.solids_percent_ul_e6 / (volume * 1_000_000) if volume > 0 else 0.0, totals.entries,
                    totals.ph)


def _no_totals() -> WasteContainerTotals:
    return WasteContainerTotals(entries=0, volume_ul=0, mass_ug=0, solids_percent_ul_e6=0, ph=None)


def solids_weight(volume_ul: int, filterable_solids_percent: Optional[float]) -> int:
    """One entry's share of ``solids_percent_ul_e6``: volume × percent × 10⁶, rounded half to even.

    >>> solids_weight(2_000_000, 1.0), solids_weight(-2_000_000, 1.0), solids_weight(5, None)
    (2000000000000, -2000000000000, 0)
    """
    if not filterable_solids_percent:
        return 0
    exact = Decimal(volume_ul) * Decimal(filterable_solids_percent) * 1_000_000
    return int(exact.to_integral_value(ROUND_HALF_EVEN))


def _values(obj) -> dict:
    return {column.name: getattr(obj, column.name) for column in type(obj).__table__.columns}


_UNCHANGED = object()


@cache
def _updating(table, *keys: str):
    """An UPDATE of ``table`` built once: the row where each key column equals parameter ``key_<column>``,
    the columns set are the other parameters given."""
    return update(table).where(*(table.c[key] == bindparam(f"key_{key}") for key in keys))


def _store(session: Session, container: WasteContainer, entry: WasteEntry, *, ph=_UNCHANGED) -> None:
    """Write ``entry`` (an addition or a reversal) with its rows, add it to the container's running totals
    and to the monthly totals, and append its audit events: Core statements, outside the ORM's flush.

    ``container`` was read under its lock with its totals (:func:`_lock`), so the new totals are its
    values plus the entry's. ``ph`` replaces the standing pH (default: the entry's, when it has one).
    The entry and its rows then belong to the session as read back; the audit events are the ones the
    flush would have written (:func:`service.store.audit.created`).
    """
    db.refuse_when_reading(session)
    connection = session.connection()
    table = WasteEntry.__table__
    values = _values(entry)
    inserted = entry.id is None  # the INSERT gives the id (SQLite); else it goes with the other writes
    if inserted:
        del values["id"]
        entry.id = values["id"] = connection.execute(sql.inserting(table, returning="id"), values).scalar_one()
    for row in (*entry.components, *entry.elements):
        row.entry_id = entry.id
    rows = {WasteEntryComponent.__table__: [_values(c) for c in entry.components],
            WasteEntryElement.__table__: [_values(e) for e in entry.elements]}
    # the rows and totals go with the events, once the chain's head is locked (one round trip on PostgreSQL)
    audit.record(session, [audit.created(table, values),
                           *(audit.created(model, row) for model, written in rows.items() for row in written)],
                 with_writes=lambda: _add(session, container, entry, ph, None if inserted else values, rows))
    sql.loaded(session, *entry.components, *entry.elements, entry)


def _add(session: Session, container: WasteContainer, entry: WasteEntry, ph, values: Optional[dict],
         rows: dict) -> None:
    """The entry (``values``, unless inserted already), its rows (``rows``: {table: column values of each}),
    the container's running totals and the monthly totals (:func:`_store`)."""
    connection = session.connection()
    if values is not None:
        connection.execute(sql.inserting(WasteEntry.__table__), values)
    for table, written in rows.items():
        if written:
            connection.execute(sql.inserting(table), written)

    totals = container.totals
    if ph is _UNCHANGED:
        ph = entry.ph if entry.ph is not None else totals.ph
    new = {"entries": totals.entries + 1, "volume_ul": totals.volume_ul + entry.volume_ul,
           "mass_ug": totals.mass_ug + entry.mass_ug, "ph": ph,
           "solids_percent_ul_e6": totals.solids_percent_ul_e6 + solids_weight(entry.volume_ul,
                                                                               entry.filterable_solids_percent)}
    connection.execute(_updating(WasteContainerTotals.__table__, "container_id"),
                       {**new, "key_container_id": container.id})
    for key, value in new.items():
        set_committed_value(totals, key, value)
    _add_rows(session, container, "element_totals", WasteContainerElement, "element", "mass_ug",
              {e.element: e.mass_ug for e in entry.elements})
    _add_rows(session, container, "component_totals", WasteContainerComponent, "substance_id", "volume_ul",
              {c.substance_id: c.volume_ul for c in entry.components})

    month_totals.add_waste(connection, {(month_totals.month_of(entry.at), container.id, e.element): (e.mass_ug, 0)
                                        for e in entry.elements})


def _add_rows(session: Session, container: WasteContainer, collection: str, model, key: str, amount: str,
              adding: dict) -> None:
    """Add ``adding`` ({key: amount}) to one of the container's running-total collections: one upsert that
    adds to the stored rows (the database adds to what it holds; nothing read before is written back).
    Rows the session holds are expired, to be read again when wanted."""
    if not adding:
        return
    session.connection().execute(sql.adding(session.get_bind().dialect.name, model.__table__),
                                 [{"container_id": container.id, key: ident, amount: value}
                                  for ident, value in adding.items()])
    if collection in container.__dict__:  # loaded: read again when next wanted
        for row in container.__dict__[collection]:
            session.expire(row, [amount])
        session.expire(container, [collection])


def _lock(session: Session, container_id: int, *, draw_id: bool = False) -> tuple[WasteContainer, Optional[int]]:
    """The container with its running totals, locked, in one statement; with ``draw_id`` also the id the
    next entry takes where that statement can draw it (PostgreSQL, from the entries' sequence), else None
    (SQLite: the entry's INSERT gives it).

    PostgreSQL locks the container's row and its totals row (``FOR UPDATE OF`` both): a statement that
    waits for the lock returns both rows as the lock holder committed them (READ COMMITTED re-reads locked
    rows), so the volume and mass judged are current. The element and component sums are not read: they
    are only ever added to (:func:`_add_rows`). On SQLite a writing session's transaction began IMMEDIATE
    and holds the database's write lock already (``service.store.db``).
    """
    postgres = session.get_bind().dialect.name == "postgresql"
    session.flush()  # what the ORM's query did first (autoflush): a pending change is written, not overwritten below
    found = session.connection().execute(_locked_read(draw_id and postgres), {"container": container_id}).mappings()
    row = found.one_or_none()
    if row is None:
        container = get(session, WasteContainer, container_id)  # raises NotFound
        container.totals = _no_totals()  # a container kept from before the running totals
        session.flush()
        return _lock(session, container_id, draw_id=draw_id)
    # the rows join the session as the ORM would load them; an object it holds takes the locked row's values
    container = sql.as_loaded(session, WasteContainer, row, refresh=True)
    totals = sql.as_loaded(session, WasteContainerTotals, row, prefix="totals_", refresh=True)
    set_committed_value(container, "totals", totals)
    return container, row["drawn"]


@cache
def _locked_read(draw_id: bool):
    """The statement of :func:`_lock`, built once (``draw_id``: with the next entry id drawn): the container's
    columns, its totals' as ``totals_<column>``, and ``drawn``."""
    # an uncorrelated subquery: drawn once for the statement, not once per joined row
    drawn = (select(func.nextval(func.pg_get_serial_sequence(WasteEntry.__tablename__, "id"))).scalar_subquery()
             if draw_id else literal(None))
    containers, totals = WasteContainer.__table__, WasteContainerTotals.__table__
    return (select(*containers.columns, *(column.label(f"totals_{column.name}") for column in totals.columns),
                   drawn.label("drawn"))
            .join(totals, totals.c.container_id == containers.c.id)
            .where(containers.c.id == bindparam("container"))
            .with_for_update(of=[containers, totals]))


@dataclass(frozen=True)
class EntryCheck:
    """What an entry would put into its container, judged as :func:`add_entry` judges it; nothing written.

    ``amount_micro`` is µL for a liquid container and µg for a solid one; ``room_micro`` what the
    container has left before the entry; ``elements`` the element rows in exact µg with their basis.
    """

    container: WasteContainer
    run: Optional[Run]
    amount_micro: int
    room_micro: int
    components: tuple[WasteEntryComponent, ...]
    elements: tuple[WasteEntryElement, ...]


def room_text(micro: int, form: str) -> str:
    """A container's room (or an amount in it) in L or kg.

    >>> room_text(1_500_000, "liquid"), room_text(250_000_000, "solid")
    ('1.5 L', '0.25 kg')
    """
    unit, scale = ("L", 1e6) if form == "liquid" else ("kg", 1e9)
    return f"{micro / scale:g} {unit}"


def _judge(session: Session, container: WasteContainer, body: EntryIn,
           balance_elements: tuple[str, ...]) -> EntryCheck:
    """The one judgement of an entry (form, state, run, amount, components, room, elements)."""
    if container.state != "open":
        raise Conflict(f"container {container.label} is {container.state.replace('_', ' ')}; entries go to open containers")
    liquid = container.form == "liquid"
    if liquid and (body.volume is None or body.mass is not None):
        raise InvalidInput("volume", f"{container.label} holds liquids: give the entry's volume (and no mass)")
    if not liquid and (body.mass is None or body.volume is not None or body.components):
        raise InvalidInput("mass", f"{container.label} holds solids: give the entry's mass (and no volume)")
    if not liquid and body.ph is not None:
        raise InvalidInput("ph", f"{container.label} holds solids: a pH is recorded for liquid wastes")
    run = None
    if body.run_id is not None:
        run = reference(session, Run, body.run_id, "run_id", lab_id=container.lab_id, lock=True)
        if run.state != "open":
            raise Conflict(f"run {run.id} is closed; record a clean-up entry without run_id instead", "run_id")
    micro = whole_micro(body.volume if liquid else body.mass, "uL" if liquid else "ug",
                        expect="volume" if liquid else "mass", field="volume" if liquid else "mass")
    if micro <= 0:
        raise QuantityError(body.volume or body.mass or "", "must be above zero", "volume" if liquid else "mass")
    components = []
    substances = _substances(session, {comp.substance_id for comp in body.components})
    for i, comp in enumerate(body.components):
        if any(c.substance_id == comp.substance_id for c in components):
            raise InvalidInput(f"components[{i}].substance_id", f"substance {comp.substance_id} is given twice; "
                               "give its volume once")
        substance = substances.get(comp.substance_id)
        if substance is None:  # as inventory.reference answers (substances belong to no lab; retired ones count)
            raise InvalidInput(f"components[{i}].substance_id", f"no substance with id {comp.substance_id}",
                               comp.substance_id)
        ul = whole_micro(comp.volume, "uL", expect="volume", field=f"components[{i}].volume")
        components.append(WasteEntryComponent(substance_id=comp.substance_id, volume_ul=ul, substance=substance))
    if sum(c.volume_ul for c in components) > micro:
        raise InvalidInput("components", "the components add up to more than the entry's volume")
    totals = container.totals or _no_totals()
    already = totals.volume_ul if liquid else totals.mass_ug
    room = max(container.capacity_micro - already, 0)
    if micro > room:
        form = container.form
        raise Conflict(f"would overfill {container.label}: it holds {room_text(already, form)} of "
                       f"{room_text(container.capacity_micro, form)}; this entry adds {room_text(micro, form)}; "
                       f"room left: {room_text(room, form)}",
                       "volume" if liquid else "mass", body.volume or body.mass)
    elements = _entry_elements(session, body, run, balance_elements)
    return EntryCheck(container, run, micro, room, tuple(components), tuple(elements))


def _substances(session: Session, ids: set[int]) -> dict[int, Substance]:
    """The substances of an entry's components by id, in one Core statement (those the session holds are
    not built again); an id without a substance is left out."""
    if not ids:
        return {}
    rows = session.connection().execute(_substances_read(), {"ids": sorted(ids)}).mappings()
    return {row["id"]: sql.as_loaded(session, Substance, row) for row in rows}


@cache
def _substances_read():
    table = Substance.__table__
    return select(table).where(table.c.id.in_(bindparam("ids", expanding=True)))


def check_entry(session: Session, container_id: int, body: EntryIn, *,
                balance_elements: tuple[str, ...] = vocab.BALANCE_ELEMENTS) -> EntryCheck:
    """Judge an entry exactly as :func:`add_entry` would, and say what it would add; nothing is written.

    The same errors as :func:`add_entry` (InvalidInput, QuantityError, Conflict) for the same input.
    """
    return _judge(session, get(session, WasteContainer, container_id), body, balance_elements)


def add_entry(session: Session, container_id: int, body: EntryIn, actor_id: Optional[int], *,
              balance_elements: tuple[str, ...] = vocab.BALANCE_ELEMENTS,
              rules: Optional[LayeredRules] = None,
              check: Optional[Callable[[WasteContainer], None]] = None) -> WasteEntry:
    """Append an entry, refusing one that would overfill the container, does not fit its form, or
    puts more of a followed element into waste than its run leaves unaccounted.

    ``balance_elements`` are the elements the run balance follows (the site's setting).
    The container's row and then the run's are locked, so concurrent entries of one run
    are judged one after the other against the same balance. With ``rules`` the container's
    accumulation area's clock is set when this entry takes the area over a limit
    (:func:`service.store.areas.refresh_clock`, same transaction). ``check`` is called with the
    locked container before anything is judged (the caller's own refusal, e.g. of another lab's container).
    """
    container, entry_id = _lock(session, container_id, draw_id=True)
    if check is not None:
        check(container)
    judged = _judge(session, container, body, balance_elements)
    liquid, micro = container.form == "liquid", judged.amount_micro
    entry = WasteEntry(id=entry_id, container_id=container.id, run_id=body.run_id, actor_id=actor_id,
                       description=body.description,
                       volume_ul=micro if liquid else 0, mass_ug=0 if liquid else micro,
                       filterable_solids_percent=body.filterable_solids_percent, ph=body.ph,
                       components=list(judged.components), elements=list(judged.elements), at=utcnow())
    _store(session, container, entry)
    if container.first_entry_at is None:
        container.first_entry_at = entry.at
    if micro >= judged.room_micro and container.full_at is None:
        container.full_at = entry.at
    session.flush()
    areas.refresh_clock(session, container.location_id, rules)
    return entry


def reverse_entry(session: Session, container_id: int, entry_id: int, reason: str, actor_id: Optional[int], *,
                  rules: Optional[LayeredRules] = None) -> WasteEntry:
    """A correction: a new entry that negates ``entry_id`` exactly (with ``rules``: the area's clock follows)."""
    container, new_id = _lock(session, container_id, draw_id=True)
    original = session.get(WasteEntry, entry_id)
    if original is None or original.container_id != container.id:
        raise InvalidInput("entry_id", f"no entry {entry_id} in container {container.label}")
    if original.reverses_entry_id is not None:
        raise Conflict("a reversing entry cannot itself be reversed; add a new entry instead")
    if session.scalar(select(WasteEntry.id).where(WasteEntry.reverses_entry_id == entry_id)):
        raise Conflict(f"entry {entry_id} is already reversed")
    if container.state == "collected":
        raise Conflict(f"container {container.label} has been collected")
    entry = WasteEntry(id=new_id, container_id=container.id, run_id=original.run_id, actor_id=actor_id,
                       description=f"reverses entry {entry_id}: {reason}", volume_ul=-original.volume_ul,
                       mass_ug=-original.mass_ug, filterable_solids_percent=original.filterable_solids_percent,
                       reverses_entry_id=entry_id, at=utcnow(),
                       components=[WasteEntryComponent(substance_id=c.substance_id, volume_ul=-c.volume_ul)
                                   for c in original.components],
                       elements=[WasteEntryElement(element=e.element, mass_ug=-e.mass_ug,
                                                   basis={"kind": "reversal", "entry_id": entry_id})
                                 for e in original.elements])
    _store(session, container, entry,
           **({"ph": _standing_ph(session, container.id, reversing=entry_id)} if original.ph is not None else {}))
    session.flush()
    areas.refresh_clock(session, container.location_id, rules)
    return entry


def _standing_ph(session: Session, container_id: int, reversing: int) -> Optional[float]:
    """The pH last recorded in the container on an entry that is neither a reversal nor reversed
    (``reversing``: the entry about to be reversed)."""
    reversed_ids = select(WasteEntry.reverses_entry_id).where(WasteEntry.container_id == container_id,
                                                              WasteEntry.reverses_entry_id.is_not(None))
    return session.scalar(select(WasteEntry.ph).where(
        WasteEntry.container_id == container_id, WasteEntry.ph.is_not(None), WasteEntry.reverses_entry_id.is_(None),
        WasteEntry.id != reversing, WasteEntry.id.not_in(reversed_ids)).order_by(WasteEntry.id.desc()).limit(1))


def determine(session: Session, container_id: int, body: DeterminationIn, actor_id: int) -> WasteDetermination:
    """Record the safety officer's determination of a container's waste codes.

    Determinations are append-only: each is a new row (and an audit event), and the latest is the
    one in force. The container's row is locked, so two determinations are ordered, not interleaved.
    """
    container, _ = _lock(session, container_id)
    row = WasteDetermination(container_id=container.id, actor_id=actor_id, comment=body.comment, at=utcnow(),
                             codes=[code.model_dump() for code in body.codes])
    session.add(row)
    session.flush()
    session.expire(container, ["determinations"])
    return row


def determination_of(container: WasteContainer) -> Optional[WasteDetermination]:
    """The determination in force: the latest recorded, or None before the first."""
    return container.determinations[-1] if container.determinations else None


def move(session: Session, container: WasteContainer, action: str, *,
         rules: Optional[LayeredRules] = None) -> WasteContainer:
    """Move the container to its next state; a collection leaves the area (with ``rules``: its clock follows)."""
    starts, target, stamp = MOVES[action]
    if container.state not in starts:
        raise Conflict(f"cannot {action.replace('_', ' ')}: container {container.label} is "
                       f"{container.state.replace('_', ' ')}", "state", container.state)
    container.state = target
    if getattr(container, stamp) is None:
        setattr(container, stamp, utcnow())
    session.flush()
    areas.refresh_clock(session, container.location_id, rules)
    return container


def _days(since: Optional[dt.datetime], now: dt.datetime) -> Optional[float]:
    return None if since is None else (now - since).total_seconds() / 86400


def subject_of(session: Session, container: WasteContainer, contents: Contents,
               now: Optional[dt.datetime] = None) -> ContainerSubject:
    """The facts the container-scope rules evaluate."""
    now = now or utcnow()
    total = contents.volume_ul
    components = []
    for substance_id, ul in sorted(contents.component_volume_ul.items()):
        substance = session.get(Substance, substance_id)
        components.append(ContainerComponent(
            name=substance.name, key=substance.key, volume_fraction=ul / total if total > 0 else 0.0,
            flash_point_c=substance.flash_point_c, flags=frozenset(substance.flags or ()),
            halogenated=bool(_HALOGENS & set(parse_formula(substance.formula).atoms)),
            density_g_per_ml=substance.density_g_per_ml))
    return ContainerSubject(
        label=container.label, stream=container.stream, form=container.form, volume_l=total / 1e6,
        mass_kg=contents.mass_ug / 1e9,
        capacity_l=container.capacity_micro / 1e6 if container.form == "liquid" else None,
        element_mass_ug=contents.element_mass_ug, components=tuple(components),
        filterable_solids_percent=contents.filterable_solids_percent,
        days_since_first_entry=_days(container.first_entry_at, now), days_since_full=_days(container.full_at, now),
        acute_hazardous=container.acute_hazardous, ph=contents.ph)


def list_containers(session: Session, *, lab_ids: Optional[set[int]] = None,
                    state: Optional[str] = None, location_id: Optional[int] = None, limit: Optional[int] = None,
                    offset: int = 0) -> Page:
    """A page of containers in id order, optionally for some labs, in one state or at one location."""
    query = select(WasteContainer).order_by(WasteContainer.id)
    if location_id is not None:
        query = query.where(WasteContainer.location_id == location_id)
    if lab_ids is not None:
        query = query.where(WasteContainer.lab_id.in_(sorted(lab_ids)))
    if state:
        query = query.where(WasteContainer.state == state)
    return paginate(session, query, limit, offset)


def entries_of(session: Session, container: WasteContainer, *, limit: Optional[int] = None, offset: int = 0) -> Page:
    """A page of a container's entries in the order they were made."""
    return paginate(session, select(WasteEntry).where(WasteEntry.container_id == container.id)
                    .order_by(WasteEntry.id), limit, offset)


def element_history(session: Session, container: WasteContainer) -> list[tuple[dt.datetime, int, str, int]]:
    """Every element row of the container's entries, reversals included, in the order they were made:
    (time, entry id, element, µg). Their running sum per element is the container's content over time."""
    return [tuple(row) for row in session.execute(
        select(WasteEntry.at, WasteEntry.id, WasteEntryElement.element, WasteEntryElement.mass_ug)
        .join(WasteEntryElement, WasteEntryElement.entry_id == WasteEntry.id)
        .where(WasteEntry.container_id == container.id).order_by(WasteEntry.id, WasteEntryElement.element))]


def elements_held(session: Session, *, lab_ids: Optional[set[int]] = None) -> set[str]:
    """The elements some container (of ``lab_ids``, or any) holds a non-zero amount of."""
    query = (select(WasteContainerElement.element).join(WasteContainer)
             .where(WasteContainerElement.mass_ug != 0).distinct())
    if lab_ids is not None:
        query = query.where(WasteContainer.lab_id.in_(sorted(lab_ids)))
    return set(session.scalars(query))
