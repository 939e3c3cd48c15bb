"""An entry is written with Core statements outside the ORM's flush (``store.waste._store``); what it leaves
behind must be what the flush left before.

The reference is the database itself, read afresh in another session: each audit event of an entry equals
its row as stored (every column, through the same ``json_safe`` the flush's events use), the chain verifies,
the running totals are the sums over the stored entries, and the session that wrote the entry holds the
same values as that fresh read (the entry, its rows and the container's totals without another statement).
"""

from __future__ import annotations

import pytest
from sqlalchemy import event, func, select

from service.schemas import EntryIn
from service.store import waste
from service.store.audit import AuditEvent, json_safe, verify_chain
from service.store.db import ReadOnlySession, new_session, session_scope
from service.store.models import (
    WasteContainerElement,
    WasteContainerTotals,
    WasteEntry,
    WasteEntryComponent,
    WasteEntryElement,
)
from tests.test_waste import _container, site  # noqa: F401 - site is a fixture


def _body(site, n: int) -> EntryIn:
    return EntryIn.model_validate({
        "description": f"wash {n}", "volume": f"{100 + n} mL", "ph": 7.0 + n / 10, "filterable_solids_percent": 0.5,
        "components": [{"substance_id": site["acetone"], "volume": "40 mL"},
                       {"substance_id": site["toluene"], "volume": f"{10 + n} mL"}],
        "elements": [{"element": "Cd", "mass": f"{n + 1} mg"}, {"element": "Se", "mass": f"{5 * n} ug"}]})


def _stored(session, model, **where) -> list[dict]:
    table = model.__table__
    rows = session.connection().execute(select(table).filter_by(**where)).mappings()
    return [{column.name: row[column.name] for column in table.columns} for row in rows]


def _events(session, entity: str, entity_id: str) -> list[AuditEvent]:
    return list(session.scalars(select(AuditEvent).where(AuditEvent.entity == entity,
                                                         AuditEvent.entity_id == entity_id)))


def test_each_row_of_an_entry_has_one_create_event_equal_to_the_stored_row(app, site):
    container = _container(site)
    sessions = app.extensions["dotledger.sessions"]
    with session_scope(sessions) as session:
        ids = [waste.add_entry(session, container["id"], _body(site, n), None).id for n in range(3)]
        original = ids[1]
        ids.append(waste.reverse_entry(session, container["id"], original, "wrong container", None).id)
    with session_scope(sessions, write=False) as session:
        for entry_id in ids:
            for model, key in ((WasteEntry, ("id",)), (WasteEntryComponent, ("entry_id", "substance_id")),
                               (WasteEntryElement, ("entry_id", "element"))):
                where = {"id": entry_id} if model is WasteEntry else {"entry_id": entry_id}
                rows = _stored(session, model, **where)
                assert rows, (model, entry_id)
                for row in rows:
                    entity_id = ",".join(str(row[k]) for k in key)
                    events = _events(session, model.__tablename__, entity_id)
                    assert [(e.action, e.before) for e in events] == [("create", None)]
                    assert events[0].after == json_safe(row)
        report = verify_chain(session)
        assert report.ok, report
        reversal = _stored(session, WasteEntry, id=ids[-1])[0]
        assert reversal["reverses_entry_id"] == original and reversal["volume_ul"] == -(100 + 1) * 1000


def test_the_writing_session_holds_what_the_database_holds(app, site):
    container = _container(site)
    sessions = app.extensions["dotledger.sessions"]
    with session_scope(sessions) as session:
        waste.add_entry(session, container["id"], _body(site, 0), None)
    with session_scope(sessions) as session:
        held = session.get(waste.WasteContainer, container["id"])  # held here, as a caller holding it would
        entry = waste.add_entry(session, container["id"], _body(site, 1), None)
        assert not session.new and not session.dirty  # nothing left for the commit's flush
        sent = []
        event.listen(session.get_bind(), "before_cursor_execute", lambda *args: sent.append(args[2]))
        seen = (entry.id, entry.container_id, entry.volume_ul, entry.ph, entry.reverses_entry_id, entry.at,
                sorted((c.substance.name, c.volume_ul) for c in entry.components),
                sorted((e.element, e.mass_ug, e.basis["kind"]) for e in entry.elements),
                (held.totals.entries, held.totals.volume_ul, held.totals.ph, held.totals.solids_percent_ul_e6))
        assert sent == []
        # the element and component sums were added to by the database: read again when wanted
        seen += (sorted((r.element, r.mass_ug) for r in held.element_totals),
                 sorted((r.substance_id, r.volume_ul) for r in held.component_totals))
        entry_id = entry.id
    with session_scope(sessions, write=False) as fresh:
        stored = fresh.get(WasteEntry, entry_id)
        container_now = fresh.get(waste.WasteContainer, container["id"])
        totals = fresh.get(WasteContainerTotals, container["id"])
        assert seen == (stored.id, stored.container_id, stored.volume_ul, stored.ph, stored.reverses_entry_id,
                        stored.at, sorted((c.substance.name, c.volume_ul) for c in stored.components),
                        sorted((e.element, e.mass_ug, e.basis["kind"]) for e in stored.elements),
                        (totals.entries, totals.volume_ul, totals.ph, totals.solids_percent_ul_e6),
                        sorted((r.element, r.mass_ug) for r in container_now.element_totals),
                        sorted((r.substance_id, r.volume_ul) for r in container_now.component_totals))
        # the running totals are the sums over the stored entries (two entries: 100 mL and 101 mL)
        assert totals.entries == 2 and totals.volume_ul == 201_000 and totals.ph == pytest.approx(7.1)
        summed = dict(fresh.execute(select(WasteEntryElement.element, func.sum(WasteEntryElement.mass_ug))
                                    .join(WasteEntry).where(WasteEntry.container_id == container["id"])
                                    .group_by(WasteEntryElement.element)).all())
        kept = dict(fresh.execute(select(WasteContainerElement.element, WasteContainerElement.mass_ug)
                                  .where(WasteContainerElement.container_id == container["id"])).all())
        assert kept == summed == {"Cd": 3000, "Se": 5}


def test_a_session_opened_for_reading_refuses_an_entry_and_nothing_is_written(app, site):
    container = _container(site)
    session = new_session(app.extensions["dotledger.sessions"], write=False)
    try:
        with pytest.raises(ReadOnlySession):
            waste.add_entry(session, container["id"], _body(site, 0), None)
    finally:
        session.rollback()
        session.close()
    with session_scope(app.extensions["dotledger.sessions"], write=False) as fresh:
        assert fresh.scalar(select(func.count()).select_from(WasteEntry)) == 0


def test_a_change_pending_in_the_session_is_written_not_overwritten_by_the_locked_read(app, site):
    # The container and its totals are read under their lock with a Core statement and handed to the session
    # (sql.as_loaded, refresh=True): a change the session holds for the container must be written first, as
    # the ORM's own query wrote it (autoflush), not replaced by the row read back.
    from service.store.models import WasteContainer

    container = _container(site)
    sessions = app.extensions["dotledger.sessions"]
    with session_scope(sessions) as session:
        held = session.get(WasteContainer, container["id"])
        held.acute_hazardous = not held.acute_hazardous
        wanted = held.acute_hazardous
        waste.add_entry(session, container["id"], _body(site, 1), None)
        assert held.acute_hazardous is wanted
    with session_scope(sessions, write=False) as session:
        assert session.get(WasteContainer, container["id"]).acute_hazardous is wanted
        assert verify_chain(session).ok
