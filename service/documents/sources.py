"""Gathering a document's data inside the request's session; rendering comes after it has ended.

The one module of the package that reads the database and the app configuration. It takes
the procedure and the container as the presentation layer shows them (``dump_procedure``,
``dump_container``, ``dump_entry``), so a document prints the numbers the API returns and
the pages show. ``assessment_for`` and ``manifest_for`` return a
:class:`~service.documents.render.Draft` (the data dict); the caller ends the session, then
renders (``Draft.render()``, ``Document.pdf()``), so no transaction stays open while
WeasyPrint works.
"""

from __future__ import annotations

import datetime as dt
import re

from flask import Flask, current_app, request

from service.appdata import statements
from service.documents.assessment import assessment_data
from service.documents.controls import ControlsFile, TransportFile, load_controls, load_transport
from service.documents.label import label_data
from service.documents.manifest import manifest_data
from service.documents.render import Draft
from service.present.procedures import dump_procedure
from service.schemas import LabelQuery, ManifestQuery
from service.present.serialize import lab_heading, location_heading, substance_facts
from service.present.waste import dump_container, dump_entry
from service.store import waste
from service.store.db import get_session
from service.store.models import Lab, Location, Procedure, Substance, User, WasteContainer
from service.store.site import site_name

__all__ = ["init_app", "assessment_for", "manifest_for", "label_for", "entry_url", "ENTRY_PATH"]

_KEY = "dotledger.documents"


def init_app(app: Flask) -> None:
    """Load ``rules/controls.yaml`` and ``rules/transport-suggestions.yaml`` (once per process and folder)."""
    rules_dir = str(app.config["RULES_DIR"])
    app.extensions[_KEY] = (load_controls(rules_dir), load_transport(rules_dir))


def _controls() -> ControlsFile:
    return current_app.extensions[_KEY][0]


def _transport() -> TransportFile:
    return current_app.extensions[_KEY][1]


def _now() -> str:
    return dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")


def _safe_name(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("_") or "document"


def _common() -> dict:
    config = current_app.config
    return {"site": site_name(get_session()), "page_size": config["PAGE_SIZE"], "generated_at": _now()}


def assessment_for(proc: Procedure) -> Draft:
    """The risk-assessment sheet's data for ``proc`` (the caller has checked the lab scope)."""
    session = get_session()
    config = current_app.config
    view = dump_procedure(proc)
    substances = [[substance_facts(d.stock.substance)] if d.stock is not None
                  else [substance_facts(c.substance) for c in d.mixture.components] for d in proc.draws]
    researcher = session.get(User, proc.researcher_id)
    decider = session.get(User, proc.decided_by_id) if proc.decided_by_id is not None else None
    document_id = f"RA-{proc.id:05d}-R{proc.revision}"
    data = assessment_data(view, substances=substances, lab=lab_heading(session.get(Lab, proc.lab_id)),
                           researcher=researcher.display_name if researcher else "—",
                           decider=decider.display_name if decider else None, document_id=document_id,
                           controls=_controls(), text_of=statements().text_of,
                           followed_elements=tuple(config["BALANCE_ELEMENTS"]), **_common())
    return Draft("assessment.html", data, document_id, f"assessment-{proc.id}-r{proc.revision}")


def _constituent_records(session, view: dict) -> dict[str, dict]:
    """The catalogue records of a container's constituents, by key (for their hazards)."""
    keys = [c["key"] for c in view["solvent_composition"] if c["key"]]
    return {s.key: substance_facts(s) for s in session.query(Substance).filter(Substance.key.in_(keys))} if keys else {}


def manifest_for(container: WasteContainer, shipment: ManifestQuery | None = None) -> Draft:
    """The waste manifest's data for ``container`` (the caller has checked the lab scope).

    ``shipment`` names the transporter, the receiving facility and the containers shipped; what it
    leaves out prints as a line to fill by hand.
    """
    session = get_session()
    view = dump_container(container)
    entries = waste.entries_of(session, container)
    records = _constituent_records(session, view)
    location = location_heading(session.get(Location, container.location_id))
    document_id = f"WM-{container.id:05d}"
    data = manifest_data(view, entries=[dump_entry(e) for e in entries], records=records,
                         lab=lab_heading(session.get(Lab, container.lab_id)), location=location, document_id=document_id,
                         transport=_transport(), text_of=statements().text_of,
                         shipment=(shipment or ManifestQuery()).model_dump(), **_common())
    return Draft("manifest.html", data, document_id, f"manifest-{_safe_name(container.label)}")


# The container's page for a new entry, which the label's QR code opens.
ENTRY_PATH = "/containers/{ident}/entry"


def entry_url(ident: int) -> str:
    """The absolute address of container ``ident``'s entry page: under ``PUBLIC_URL`` when it is set
    (a server behind a proxy, and the command line), else under the address the request came to."""
    base = current_app.config.get("PUBLIC_URL") or request.host_url
    return base.rstrip("/") + ENTRY_PATH.format(ident=ident)


def label_for(container: WasteContainer, query: LabelQuery | None = None) -> Draft:
    """The label's data for ``container`` at ``query.size`` (the caller has checked the lab scope)."""
    session = get_session()
    query = query or LabelQuery()
    view = dump_container(container)
    document_id = f"WL-{container.id:05d}"
    common = {k: v for k, v in _common().items() if k != "page_size"}  # a label sets its own page size
    data = label_data(view, records=_constituent_records(session, view),
                      lab=lab_heading(session.get(Lab, container.lab_id)),
                      location=location_heading(session.get(Location, container.location_id)),
                      document_id=document_id, entry_url=entry_url(container.id), size=query.size,
                      text_of=statements().text_of, **common)
    return Draft("label.html", data, document_id, f"label-{_safe_name(container.label)}-{query.size}")
