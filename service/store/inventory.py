"""Inventory service functions: labs, locations, substances, stocks and mixtures.

Views and the importer call these; they validate references, compute element content
with the pure core and flush, so that conflicts surface here as domain errors.
"""

from __future__ import annotations

from dataclasses import dataclass
from decimal import Decimal
from typing import Any, Optional, TypeVar, Union

from pydantic import BaseModel
from sqlalchemy import and_, exists, func, select
from sqlalchemy.orm import Session

from service.chem.content import (
    Component,
    mixture_element_masses_ug,
    share_ug,
    substance_element_masses_ug,
    total_ug,
)
from service.chem.formula import parse_formula
from service.chem.substances import SubstanceCatalogue
from service.chem.units import exact_micro, kind_of, micro_text, parse_quantity, to_decimal
from service.errors import Conflict, InvalidInput, NotFound
from service.schemas import MixtureIn, MixturePatch, StockIn, StockPatch
from service.store import holdings
from service.store.paging import Page, paginate
from service.store.models import (
    Lab,
    Location,
    Mixture,
    MixtureComponent,
    Procedure,
    Run,
    MixtureElement,
    Stock,
    StockElement,
    Substance,
    User,
    WasteContainer,
    utcnow,
)

__all__ = [
    "get",
    "reference",
    "create_record",
    "update_record",
    "retire",
    "list_records",
    "locations_by_id",
    "source_labels",
    "create_stock",
    "create_product_stock",
    "update_stock",
    "source_element_masses",
    "draw_from",
    "Taken",
    "BeyondHeld",
    "create_mixture",
    "update_mixture",
    "Draw",
    "draw_of",
    "take",
    "sync_catalogue",
    "element_totals",
]

T = TypeVar("T")
_ENTITY = {Lab: "lab", Location: "location", Substance: "substance", Stock: "stock", Mixture: "mixture", User: "user",
           Procedure: "procedure", Run: "run", WasteContainer: "waste container"}
# Columns whose values must be unique together, compared case-insensitively ("NG-01" and "ng-01" are one label;
# the text itself is NFKC-normalised by the schemas). The unique constraints of the tables stay the last guard.
_UNIQUE = {Lab: (("code",),), Substance: (("key",),), Stock: (("label",),), Mixture: (("label",),),
           Location: (("building", "room", "storage"),)}


def get(session: Session, model: type[T], ident: int, *, field: Optional[str] = None) -> T:
    """The record, or NotFound (InvalidInput naming ``field`` when it is a reference)."""
    record = session.get(model, ident)
    if record is None:
        if field:
            raise InvalidInput(field, f"no {_ENTITY[model]} with id {ident}", ident)
        raise NotFound(_ENTITY[model], ident)
    return record


def _lab_of(record) -> Optional[int]:
    return record.id if isinstance(record, Lab) else getattr(record, "lab_id", None)


def reference(session: Session, model: type[T], ident: int, field: str, *, lab_id: Optional[int] = None,
              active: bool = True, lock: bool = False) -> T:
    """The record that ``field`` refers to, if the caller may refer to it; else InvalidInput naming ``field``.

    The caller's labs are ``session.info["lab_scope"]`` (set per request from the signed-in user;
    absent or None for site-wide roles and the CLI). ``lab_id`` further asks for a record of that
    lab (a waste entry's run of the container's lab, a stock's location of the stock's lab).
    Records without a lab (substances, shared locations) pass both. A missing record and one the
    caller may not refer to get the same answer, so it tells nothing of other labs' records;
    ``active`` refuses a retired one; ``lock`` takes the row lock (SELECT … FOR UPDATE).
    """
    if lock:
        record = session.scalar(select(model).where(model.id == ident).with_for_update(of=model))
    else:
        record = session.get(model, ident)
    owner = None if record is None else _lab_of(record)
    scope = session.info.get("lab_scope")
    if record is None or (owner is not None and ((scope is not None and owner not in scope)
                                                 or (lab_id is not None and owner != lab_id))):
        raise InvalidInput(field, f"no {_ENTITY[model]} with id {ident}", ident)
    if active and getattr(record, "retired_at", None) is not None:
        raise InvalidInput(field, f"{_ENTITY[model]} {ident} is retired", ident)
    return record


def same_text(column, value: str):
    """A clause: ``column`` equals ``value`` ignoring case (SQL lower() on both sides)."""
    return func.lower(column) == func.lower(value)


def _check_unique(session: Session, model, values: dict[str, Any], own_id: Optional[int] = None) -> None:
    for columns in _UNIQUE.get(model, ()):
        if any(values.get(column) is None for column in columns):
            continue
        clause = and_(*(same_text(getattr(model, column), values[column]) for column in columns))
        if own_id is not None:
            clause = clause & (model.id != own_id)
        if session.scalar(select(exists().where(clause))):
            shown = ", ".join(str(values[c]) for c in columns)
            raise Conflict(f"a {_ENTITY[model]} with {'/'.join(columns)} {shown!r} exists (case is not a difference)",
                           columns[-1], shown)


def _check_refs(session: Session, values: dict[str, Any], lab_id: Optional[int] = None) -> None:
    """Check the lab, location and substance that ``values`` refer to; a location must be of the
    record's lab (``values["lab_id"]``, else ``lab_id``: the lab of the record being updated) or shared."""
    owner = values.get("lab_id", lab_id)
    for field, model in (("lab_id", Lab), ("location_id", Location), ("substance_id", Substance)):
        if values.get(field) is not None:
            reference(session, model, values[field], field, lab_id=owner if model is Location else None)


def create_record(session: Session, model: type[T], body: BaseModel, **extra: Any) -> T:
    """Create a lab, location or substance from its validated body."""
    values = {**body.model_dump(mode="python"), **extra}
    if model is Substance:
        values = _substance_values(values)
    _check_unique(session, model, values)
    _check_refs(session, values)
    record = model(**values)
    session.add(record)
    session.flush()
    return record


def update_record(session: Session, record: T, patch: BaseModel) -> T:
    """Apply the fields set in ``patch`` to a lab, location or substance."""
    values = patch.model_dump(exclude_unset=True)
    # Columns unique together are checked with the record's other values (a patch may name one of them).
    stored = {column: getattr(record, column) for columns in _UNIQUE.get(type(record), ()) for column in columns}
    _check_unique(session, type(record), {**stored, **values}, record.id)
    _check_refs(session, values)
    for key, value in values.items():
        setattr(record, key, value)
    session.flush()
    return record


def retire(session: Session, record: T) -> T:
    """Mark a record retired (kept for the ledger, hidden from default listings)."""
    if record.retired_at is not None:
        raise Conflict(f"{_ENTITY[type(record)]} {record.id} is already retired")
    record.retired_at = utcnow()
    if isinstance(record, (Stock, Mixture)):  # what it still holds leaves the inventory with it
        holdings.record(record, "retired", holdings.content_of(record), sign=-1, session=session)
    session.flush()
    return record


def list_records(
    session: Session,
    model,
    *,
    include_retired: bool = False,
    lab_id: Optional[int] = None,
    location_id: Optional[int] = None,
    substance_id: Optional[int] = None,
    element: Optional[str] = None,
    lab_ids: Optional[set[int]] = None,
    limit: int = 500,
    offset: int = 0,
) -> Page:
    """One page of records of ``model`` with the filters that apply to it, in id order.

    ``lab_ids`` limits labs, locations, stocks and mixtures to those labs.
    """
    query = select(model)
    if not include_retired:
        query = query.where(model.retired_at.is_(None))
    if lab_ids is not None:  # a lab-scoped user: only records of their labs
        column = model.id if model is Lab else getattr(model, "lab_id", None)
        if column is not None:
            clause = column.in_(sorted(lab_ids))
            query = query.where(clause | Location.lab_id.is_(None) if model is Location else clause)
    for column, value in (("lab_id", lab_id), ("location_id", location_id), ("substance_id", substance_id)):
        if value is not None and hasattr(model, column):
            query = query.where(getattr(model, column) == value)
    if element:
        holder = {Stock: (StockElement, StockElement.stock_id), Mixture: (MixtureElement, MixtureElement.mixture_id)}
        if model in holder:
            table, fk = holder[model]
            query = query.where(exists().where(fk == model.id, table.element == element, table.mass_ug > 0))
        elif model is Substance:
            # Formulas are parsed, not matched as text ("C" must not match "Cd").
            rows = session.scalars(query.order_by(model.id)).unique()
            matching = [s for s in rows if element in parse_formula(s.formula).atoms]
            return Page(matching[offset : offset + limit], len(matching), limit, offset)
    return paginate(session, query.order_by(model.id), limit, offset)


def source_labels(session: Session, mixtures) -> dict[str, str]:
    """Labels of the stocks and mixtures the components of ``mixtures`` drew from, keyed ``stock:<id>`` /
    ``mixture:<id>`` (retired ones too), in at most two queries."""
    out: dict[str, str] = {}
    for model, column, kind in ((Stock, "source_stock_id", "stock"), (Mixture, "source_mixture_id", "mixture")):
        wanted = sorted({getattr(c, column) for m in mixtures for c in m.components} - {None})
        if wanted:
            rows = session.execute(select(model.id, model.label).where(model.id.in_(wanted)))
            out.update({f"{kind}:{ident}": label for ident, label in rows})
    return out


def locations_by_id(session: Session, ids) -> dict[int, Location]:
    """The locations with these ids (retired ones too), in one query."""
    wanted = sorted({i for i in ids if i is not None})
    return {loc.id: loc for loc in session.scalars(select(Location).where(Location.id.in_(wanted)))} if wanted else {}


# --- stocks -------------------------------------------------------------------


def _quantity_micro(amount: str) -> tuple[str, int]:
    quantity = parse_quantity(amount, expect=("mass", "volume"), field="amount")
    kind = kind_of(quantity)
    unit = "ug" if kind == "mass" else "uL"
    return kind, int(to_decimal(quantity, unit).to_integral_value())


def is_product(stock: Stock) -> bool:
    """True for a run's product kept as a stock: its element rows are given, not computed from a formula."""
    return stock.origin_output_id is not None


def stock_elements(stock: Stock, amount: Optional[str] = None) -> list[StockElement]:
    """The element rows of ``amount`` (default: the amount held) of the stock's substance, from its formula."""
    substance = stock.substance
    masses = substance_element_masses_ug(
        stock.amount_text if amount is None else amount,
        substance.formula,
        purity=Decimal(repr(stock.purity_percent)) / 100,
        density_g_per_ml=stock.density_g_per_ml or substance.density_g_per_ml,
        substance=substance.name,
    )
    return [StockElement(element=s, mass_ug=ug) for s, ug in sorted(masses.items())]


def create_stock(session: Session, body: StockIn, *, elements: Optional[dict[str, int]] = None,
                 change: str = "received") -> Stock:
    """A new stock; its element rows computed from the formula, or ``elements`` ({symbol: µg}) as given
    (what left another stock, so that a transfer neither creates nor destroys metal by rounding).
    Its content is recorded as a holding change of kind ``change`` (received, or transferred_in)."""
    values = body.model_dump()
    _check_unique(session, Stock, values)
    _check_refs(session, values)
    amount = values.pop("amount")
    kind, micro = _quantity_micro(amount)
    stock = Stock(**values, amount_text=amount, quantity_kind=kind, quantity_micro=micro)
    stock.substance = session.get(Substance, body.substance_id)
    stock.elements = (stock_elements(stock) if elements is None
                      else [StockElement(element=e, mass_ug=ug) for e, ug in sorted(elements.items())])
    session.add(stock)
    holdings.record(stock, change, holdings.content_of(stock), sign=1, session=session)
    session.flush()
    return stock


def _product_substance(session: Session, substance_id: Optional[int], masses_ug: dict[str, int]) -> Substance:
    """The catalogue entry a product is, as named; else the one active entry made of exactly the product's elements."""
    if substance_id is not None:
        return reference(session, Substance, substance_id, "substance_id")
    present = {s for s, ug in masses_ug.items() if ug}
    matches = [s for s in session.scalars(select(Substance).where(Substance.retired_at.is_(None)).order_by(Substance.id))
               if present and set(parse_formula(s.formula).atoms) == present]
    if len(matches) != 1:
        made_of = ", ".join(sorted(present)) or "no recorded element"
        found = f"{len(matches)} entries ({', '.join(m.name for m in matches)})" if matches else "no entry"
        raise InvalidInput("substance_id", f"name the catalogue entry this product is: {found} of the catalogue "
                                           f"is made of exactly {made_of}")
    return matches[0]


def create_product_stock(session: Session, *, label: str, amount: str, location_id: int, substance_id: Optional[int],
                         lab_id: int, run_id: int, output_id: int, masses_ug: dict[str, int]) -> Stock:
    """A run's product put into the inventory: its element rows are ``masses_ug`` as given (not from a formula)."""
    _check_unique(session, Stock, {"label": label})
    reference(session, Location, location_id, "location_id", lab_id=lab_id)
    substance = _product_substance(session, substance_id, masses_ug)
    kind, micro = _quantity_micro(amount)
    if micro <= 0:
        raise InvalidInput("amount", "must be above zero: the product as held", amount)
    stock = Stock(label=label, substance_id=substance.id, lab_id=lab_id, location_id=location_id, amount_text=amount,
                  quantity_kind=kind, quantity_micro=micro, purity_percent=100.0, origin_run_id=run_id,
                  origin_output_id=output_id)
    stock.substance = substance
    stock.elements = [StockElement(element=s, mass_ug=ug) for s, ug in sorted(masses_ug.items())]
    session.add(stock)
    holdings.record(stock, "product", masses_ug, sign=1, session=session, run=session.get(Run, run_id))
    session.flush()
    return stock


def update_stock(session: Session, stock: Stock, patch: StockPatch) -> Stock:
    values = patch.model_dump(exclude_unset=True)
    _check_unique(session, Stock, values, stock.id)
    _check_refs(session, values, stock.lab_id)
    # Only a corrected amount, purity or density recomputes the content; a draw left it exact to the µg.
    recompute = bool(values.keys() & {"amount", "purity_percent", "density_g_per_ml"})
    if "amount" in values:
        amount = values.pop("amount")
        stock.quantity_kind, stock.quantity_micro = _quantity_micro(amount or "")
        stock.amount_text = amount
    for key, value in values.items():
        setattr(stock, key, value)
    if recompute and not is_product(stock):  # a product's content is what its run recorded
        before = holdings.content_of(stock)
        stock.elements = stock_elements(stock)
        holdings.record_difference(stock, before)
    session.flush()
    return stock


# --- draws --------------------------------------------------------------------


# An amount as text ("2.5 mg"), or already parsed as (kind, exact µg or µL) (``units.exact_micro``).
Amount = Union[str, tuple[str, Decimal]]


def source_element_masses(stock: Optional[Stock], mixture: Optional[Mixture], amount: Amount,
                          field: str = "amount") -> dict[str, int]:
    """Element masses (µg) in ``amount`` of a stock or a mixture (:func:`draw_of`): what a planned
    draw would carry; :func:`draw_from` takes it out of the source."""
    return draw_of(stock if stock is not None else mixture, amount, field).element_mass_ug


@dataclass(frozen=True)
class Taken:
    """What one draw took: the amount in the source's own unit (µg of a stock kept by mass, µL of a
    stock kept by volume or of a mixture), exactly and as text in mg or mL, the element masses (µg)
    and the holding changes that record it (``service.store.holdings``)."""

    amount_text: str
    quantity_micro: int
    element_mass_ug: dict[str, int]
    changes: tuple = ()


class BeyondHeld(Conflict):
    """A draw asks for more than the source holds (``field`` names the amount)."""


def draw_from(source: Stock | Mixture, amount: Optional[str], field: str, *, change: str, **links) -> Taken:
    """Take ``amount`` (None: all it holds) out of a stock or mixture the caller has locked.

    The one draw of the service: runs, mixture preparation, disposals, transfers and shipments all
    take through it. :func:`draw_of` gives the element masses (the source's stored rows in proportion
    to the amount; taking everything takes the rows exactly), then :func:`take` lowers the source by
    exactly those and records the holding changes of kind ``change`` (linked to ``links``), so what
    leaves a source is what arrives elsewhere, to the microgram. Refused: nothing to take, or more
    than the source holds (BeyondHeld naming ``field``).
    """
    kind, held = held_of(source)
    if amount is None:
        if held <= 0:
            raise BeyondHeld(f"{source.label} is empty", field)
        amount = _format(held, kind)
    draw = draw_of(source, amount, field)
    if draw.micro <= 0:
        raise InvalidInput(field, "must be above zero", amount)
    changes = take(source, draw, field, amount, change=change, **links)
    return Taken(_format(draw.micro, kind), draw.micro, draw.element_mass_ug, tuple(changes))


# --- mixtures -----------------------------------------------------------------


def mixture_elements(mixture: Mixture, volume: Optional[str] = None) -> list[MixtureElement]:
    """The element rows of ``volume`` (default: the volume held) of the mixture, from its composition."""
    components = [
        Component(
            substance=c.substance.name,
            formula=c.substance.formula,
            molarity=c.molarity_text,
            mass_fraction=Decimal(c.mass_fraction) if c.mass_fraction is not None else None,
            volume_fraction=Decimal(c.volume_fraction) if c.volume_fraction is not None else None,
            density_g_per_ml=c.substance.density_g_per_ml,
        )
        for c in mixture.components
    ]
    masses = mixture_element_masses_ug(
        mixture.volume_text if volume is None else volume, components, density_g_per_ml=mixture.density_g_per_ml,
        name=mixture.name,
    )
    return [MixtureElement(element=s, mass_ug=ug) for s, ug in sorted(masses.items())]


def _volume_ul(volume: str) -> int:
    quantity = parse_quantity(volume, expect="volume", field="volume")
    return int(to_decimal(quantity, "uL").to_integral_value())


def _drawn_component(session: Session, comp, field: str, lab_id: int, substance: Substance,
                     mixture: Mixture) -> tuple[dict, dict[str, int]]:
    """Take a prepared mixture's component out of its source; (the component's provenance columns, µg taken).

    The source is a stock or mixture of the mixture's own lab (another lab's answers as a missing id)
    and must hold the component's substance.
    """
    if comp.source_stock_id is not None:
        source = reference(session, Stock, comp.source_stock_id, f"{field}.source_stock_id", lab_id=lab_id, lock=True)
        if source.substance_id != substance.id:
            raise InvalidInput(f"{field}.substance_id", f"stock {source.label} holds {source.substance.name}, "
                               f"not {substance.name}", substance.id)
    else:
        source = reference(session, Mixture, comp.source_mixture_id, f"{field}.source_mixture_id", lab_id=lab_id,
                           lock=True)
        if substance.id not in {c.substance_id for c in source.components}:
            raise InvalidInput(f"{field}.substance_id", f"mixture {source.label} has no component {substance.name}",
                               substance.id)
    taken = draw_from(source, comp.amount, f"{field}.amount", change="used_for_mixture",
                      into_mixture=mixture).element_mass_ug
    return {"source_stock_id": comp.source_stock_id, "source_mixture_id": comp.source_mixture_id,
            "amount_text": comp.amount, "element_mass_ug": taken}, taken


def create_mixture(session: Session, body: MixtureIn) -> Mixture:
    """Record a mixture. A prepared one draws each component from its source in this transaction and holds
    exactly the element masses drawn; one received as a solution draws nothing and holds what its stated
    concentrations give."""
    values = body.model_dump(exclude={"components"})
    _check_unique(session, Mixture, values)
    _check_refs(session, values)
    volume = values.pop("volume")
    mixture = Mixture(**values, volume_text=volume, volume_ul=_volume_ul(volume))
    drawn: list[dict[str, int]] = []
    for position, comp in enumerate(body.components):
        field = f"components[{position}]"
        substance = reference(session, Substance, comp.substance_id, f"{field}.substance_id")
        named = "source_stock_id" if comp.source_stock_id is not None else "source_mixture_id"
        has_source = comp.amount is not None
        if body.received_as_solution and has_source:
            raise InvalidInput(f"{field}.{named}", "a mixture received as a solution draws from no stock or mixture")
        if not body.received_as_solution and not has_source:
            raise InvalidInput(f"{field}.source_stock_id", "name the stock (source_stock_id) or mixture "
                               "(source_mixture_id) this component is drawn from and the amount drawn; "
                               "a mixture received ready-made is marked received_as_solution")
        provenance = {}
        if has_source:
            provenance, taken = _drawn_component(session, comp, field, body.lab_id, substance, mixture)
            drawn.append(taken)
        mixture.components.append(
            MixtureComponent(
                position=position,
                substance=substance,
                substance_id=substance.id,
                molarity_text=comp.molarity,
                mass_fraction=None if comp.mass_fraction is None else str(comp.mass_fraction),
                volume_fraction=None if comp.volume_fraction is None else str(comp.volume_fraction),
                **provenance,
            )
        )
    if body.received_as_solution:
        mixture.elements = mixture_elements(mixture)
    else:
        mixture.elements = [MixtureElement(element=s, mass_ug=ug) for s, ug in sorted(total_ug(drawn).items())]
    session.add(mixture)
    holdings.record(mixture, "received" if body.received_as_solution else "prepared", holdings.content_of(mixture),
                    sign=1, session=session)
    session.flush()
    return mixture


def update_mixture(session: Session, mixture: Mixture, patch: MixturePatch) -> Mixture:
    """Apply a patch. A received solution's content follows a corrected volume or density; a prepared
    mixture's content is what it drew (less what was drawn from it), whatever its volume reads."""
    values = patch.model_dump(exclude_unset=True)
    _check_refs(session, values, mixture.lab_id)
    recompute = mixture.received_as_solution and bool(values.keys() & {"volume", "density_g_per_ml"})
    if "volume" in values:
        volume = values.pop("volume") or ""
        mixture.volume_ul = _volume_ul(volume)
        mixture.volume_text = volume
    for key, value in values.items():
        setattr(mixture, key, value)
    if recompute:
        before = holdings.content_of(mixture)
        mixture.elements = mixture_elements(mixture)
        holdings.record_difference(mixture, before)
    session.flush()
    return mixture


# --- draws ------------------------------------------------------------------


@dataclass(frozen=True)
class Draw:
    """What a draw takes from a stock or mixture.

    ``micro`` is the amount in the source's own unit (µg for a stock kept by mass; µL for a stock
    kept by volume and for a mixture); ``element_mass_ug`` the element masses it takes.
    """

    micro: int
    element_mass_ug: dict[str, int]


def held_of(source: Union[Stock, Mixture]) -> tuple[str, int]:
    """How a source is kept and how much it holds: ("mass", µg) or ("volume", µL)."""
    return (source.quantity_kind, source.quantity_micro) if isinstance(source, Stock) else ("volume", source.volume_ul)


def draw_of(source: Union[Stock, Mixture], amount: Amount, field: str = "amount") -> Draw:
    """THE element masses of drawing ``amount`` from a stock or mixture (run draws and planned draws alike).

    ``amount`` is text, or the (kind, exact µg or µL) a planned draw stores, which is not parsed again.

    The amount is put in the source's own unit (a density converts between mass and volume: the
    stock's own, or for a catalogue stock its substance's; a product stock has only its own), and
    the draw takes the source's stored element rows in proportion to it over the amount held,
    exactly (``chem.content.share_ug``), so that :func:`take` leaves the source exactly what was
    not taken. A source that holds nothing has no rows to share: a catalogue stock or a mixture
    then gives the content its formula or composition would have; a product stock nothing.
    """
    stock = source if isinstance(source, Stock) else None
    if isinstance(amount, str):
        given, exact = exact_micro(parse_quantity(amount, expect=("mass", "volume") if stock is not None else "volume",
                                                  field=field))
    else:
        (given, exact), amount = amount, micro_text(*amount)
    kind, held = held_of(source)
    if given == kind:
        wanted = exact
    else:
        density = stock.density_g_per_ml if is_product(stock) else (stock.density_g_per_ml
                                                                     or stock.substance.density_g_per_ml)
        if density is None:
            raise InvalidInput(field, f"{stock.label} is kept by {kind}; give the draw as a {kind}", amount)
        grams = exact / 1_000_000 if given == "mass" else exact / 1000 * Decimal(repr(density))
        wanted = grams * 1_000_000 if kind == "mass" else grams / Decimal(repr(density)) * 1000
    micro = int(wanted.to_integral_value())
    if held > 0:
        masses = share_ug({e.element: e.mass_ug for e in source.elements}, micro, held)
    elif stock is None:
        masses = {e.element: e.mass_ug for e in mixture_elements(source, amount)}
    elif is_product(stock):
        masses = {}
    else:
        masses = {e.element: e.mass_ug for e in stock_elements(stock, amount)}
    return Draw(micro, masses)


def _format(micro: int, kind: str) -> str:
    value = Decimal(micro) / 1000
    return f"{value.normalize():f} {'mg' if kind == 'mass' else 'mL'}"


def take(source: Union[Stock, Mixture], draw: Draw, field: str, amount: str, *, change: str,
         **links) -> list:
    """Take ``draw`` out of ``source`` (locked by the caller): its amount and each element row drop by
    exactly what the draw takes, recorded as holding changes of kind ``change`` (linked to ``links``:
    run, movement or into_mixture), which are returned. A draw beyond what the source holds is
    refused (Conflict naming ``field``)."""
    kind, held = held_of(source)
    if draw.micro > held:
        shown = "mg" if kind == "mass" else "mL"
        raise BeyondHeld(f"{source.label} holds {held / 1000:g} {shown}; the draw asks for "
                         f"{draw.micro / 1000:g} {shown}", field, amount)
    rows = {row.element: row for row in source.elements}
    if any(ug > (rows[element].mass_ug if element in rows else 0) for element, ug in draw.element_mass_ug.items()):
        raise Conflict(f"{source.label} holds less of an element than the draw would take", field, amount)
    for element, ug in draw.element_mass_ug.items():
        if ug:
            rows[element].mass_ug -= ug
    if isinstance(source, Stock):
        source.quantity_micro = held - draw.micro
        source.amount_text = _format(source.quantity_micro, kind)
    else:
        source.volume_ul = held - draw.micro
        source.volume_text = _format(source.volume_ul, kind)
    return holdings.record(source, change, draw.element_mass_ug, sign=-1, **links)


# --- catalogue ----------------------------------------------------------------


def _substance_values(values: dict[str, Any]) -> dict[str, Any]:
    values = dict(values)
    values["hazard"] = dict(values.get("hazard") or {})
    values["hazard"] = {k: list(v) if isinstance(v, tuple) else v for k, v in values["hazard"].items()}
    values["synonyms"] = list(values.get("synonyms") or ())
    values["flags"] = list(values.get("flags") or ())
    values.setdefault("origin", "local")
    return values


def sync_catalogue(session: Session, catalogue: SubstanceCatalogue) -> tuple[int, int]:
    """Insert or update the shipped catalogue's substances; returns (added, updated)."""
    existing = {s.key: s for s in session.scalars(select(Substance))}
    added = updated = 0
    for entry in catalogue.substances:
        values = _substance_values(entry.model_dump(mode="python"))
        values["origin"] = "catalogue"
        record = existing.get(entry.key)
        if record is None:
            session.add(Substance(**values))
            added += 1
        elif any(getattr(record, k) != v for k, v in values.items()):
            for key, value in values.items():
                setattr(record, key, value)
            updated += 1
    session.flush()
    return added, updated



def element_totals(session: Session, *, lab_ids: Optional[set[int]] = None) -> dict[str, int]:
    """Element mass (µg) on hand in active stocks and mixtures, summed in SQL (optionally for some labs)."""
    totals: dict[str, int] = {}
    for table, fk, owner in (
        (StockElement, StockElement.stock_id, Stock),
        (MixtureElement, MixtureElement.mixture_id, Mixture),
    ):
        query = (
            select(table.element, func.sum(table.mass_ug))
            .join(owner, owner.id == fk)
            .where(owner.retired_at.is_(None))
            .group_by(table.element)
        )
        if lab_ids is not None:
            query = query.where(owner.lab_id.in_(sorted(lab_ids)))
        for element, mass_ug in session.execute(query):
            totals[element] = totals.get(element, 0) + int(mass_ug or 0)
    return totals
