"""Gathering a document's records inside an app context, then building and rendering it.

The one module of the package that reads the database and the app configuration; it
reuses the JSON views (``dump_procedure``, ``dump_container``, ``dump_entry``) so a
document prints the same numbers the API returns.
"""

from __future__ import annotations

import datetime as dt
import re
from functools import lru_cache

from flask import current_app

from service.documents.assessment import assessment_data
from service.documents.controls import load_controls, load_transport
from service.documents.manifest import manifest_data
from service.documents.render import Document, render_html
from service.store.db import get_session
from service.store.site import site_name
from service.store.models import Lab, Location, Procedure, Substance, User, WasteContainer, WasteEntry

__all__ = ["assessment_for", "manifest_for"]


@lru_cache(maxsize=8)
def _statements(rules_dir: str):
    from service.chem.substances import load_catalogue

    return load_catalogue(rules_dir)[1]


def _now() -> str:
    return dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")


def _substance(record: Substance) -> dict:
    return {"key": record.key, "name": record.name, "formula": record.formula, "cas": record.cas,
            "state": record.state, "flash_point_c": record.flash_point_c, "hazard": record.hazard or {},
            "flags": list(record.flags or ())}


def _lab(lab: Lab) -> dict:
    return {"id": lab.id, "code": lab.code, "name": lab.name}


def _safe_name(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("_") or "document"


def _common() -> dict:
    config = current_app.config
    return {"site": site_name(get_session()), "page_size": config["PAGE_SIZE"], "generated_at": _now()}


def assessment_for(proc: Procedure) -> Document:
    """The risk-assessment sheet of ``proc`` (the caller has checked the lab scope)."""
    from service.api.procedures import dump_procedure

    session = get_session()
    config = current_app.config
    view = dump_procedure(proc)
    substances = [[_substance(d.stock.substance)] if d.stock is not None
                  else [_substance(c.substance) for c in d.mixture.components] for d in proc.draws]
    researcher = session.get(User, proc.researcher_id)
    document_id = f"RA-{proc.id:05d}-R{proc.revision}"
    data = assessment_data(view, substances=substances, lab=_lab(session.get(Lab, proc.lab_id)),
                           researcher=researcher.display_name if researcher else "—", document_id=document_id,
                           controls=load_controls(config["RULES_DIR"]), text_of=_statements(config["RULES_DIR"]).text_of,
                           followed_elements=tuple(config["BALANCE_ELEMENTS"]), **_common())
    return render_html("assessment.html", data, document_id=document_id,
                       filename=f"assessment-{proc.id}-r{proc.revision}")


def manifest_for(container: WasteContainer) -> Document:
    """The waste manifest of ``container`` (the caller has checked the lab scope)."""
    from service.api.waste import dump_container, dump_entry

    session = get_session()
    config = current_app.config
    view = dump_container(container)
    entries = session.query(WasteEntry).filter(WasteEntry.container_id == container.id).order_by(WasteEntry.id)
    keys = [c["key"] for c in view["solvent_composition"] if c["key"]]
    records = {s.key: _substance(s) for s in session.query(Substance).filter(Substance.key.in_(keys))} if keys else {}
    place = session.get(Location, container.location_id)
    location = {"building": place.building, "room": place.room, "storage": place.storage} if place else {}
    document_id = f"WM-{container.id:05d}"
    data = manifest_data(view, entries=[dump_entry(e) for e in entries], records=records,
                         lab=_lab(session.get(Lab, container.lab_id)), location=location, document_id=document_id,
                         transport=load_transport(config["RULES_DIR"]), text_of=_statements(config["RULES_DIR"]).text_of,
                         **_common())
    return render_html("manifest.html", data, document_id=document_id, filename=f"manifest-{_safe_name(container.label)}")
