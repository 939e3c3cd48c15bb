"""What the container page's buttons do, the determination form, and the accumulation-area pages.

State moves (mark full, request pickup, record collection) post to ``web.container_move``, which takes
the store's :func:`service.store.waste.move` and lets a role do exactly what the API lets it do: the route
is open to the roles that may take some move, and the view checks the role against the API endpoint of
that move (``api.<action>_waste_container`` in service.permissions). The determination form posts the
API's body (:class:`service.schemas.DeterminationIn`) to :func:`service.store.waste.determine`.
"""

from __future__ import annotations

import re

from flask import redirect, render_template, request, url_for
from pydantic import ValidationError

from service import vocab
from service.appdata import active_rules
from service.auth import check_lab, current_user, lab_scope
from service.errors import Conflict, Forbidden, NotFound
from service.permissions import allowed
from service.present.areas import dump_area
from service.present.waste import dump_container
from service.schemas import DeterminationIn, PageQuery
from service.store import areas, inventory, waste
from service.store.db import get_session
from service.store.models import WasteContainer
from service.web import bp
from service.web.fields import field_message
from service.web.waste import MOVE_LABELS, container_page

CODE_ROWS = 4
_CODE_ROW = re.compile(r"^codes-(\d{1,2})-(system|code|description)$")


def _visible(ident: int) -> WasteContainer:
    container = inventory.get(get_session(), WasteContainer, ident)
    check_lab(container.lab_id)
    return container


@bp.post("/waste/<int:ident>/move/<action>", endpoint="container_move")
def container_move(ident: int, action: str):
    if action not in waste.MOVES:
        raise NotFound("container action", action)
    container = _visible(ident)
    user = current_user()
    try:
        if not allowed(f"api.{action}_waste_container", user.role):
            raise Forbidden(f"a {user.role.replace('_', ' ')} may not {MOVE_LABELS[action].lower()}")
        waste.move(get_session(), container, action, rules=active_rules())
    except (Conflict, Forbidden) as exc:
        get_session().rollback()
        return container_page(ident, problem=str(exc), status=403 if isinstance(exc, Forbidden) else 409)
    return redirect(url_for("web.container", ident=ident, done=action), 303)


# --- the determination ----------------------------------------------------------------------------


def _code_rows(form) -> list[dict]:
    found: dict[int, dict] = {}
    for key, value in form.items():
        match = _CODE_ROW.match(key)
        if match:
            found.setdefault(int(match[1]), {"system": "", "code": "", "description": ""})[match[2]] = value
    return [found[i] for i in sorted(found)]


def _suggested_rows(view: dict) -> list[dict]:
    """The determination in force, else the codes the findings suggest, as rows to confirm or change."""
    if view["determination"]:
        rows = [{**c, "description": c["description"] or ""} for c in view["determination"]["codes"]]
    else:
        seen, rows = set(), []
        for f in view["findings"]:
            code = f.get("suggested_code")
            if code and (code["system"], code["code"]) not in seen:
                seen.add((code["system"], code["code"]))
                rows.append({"system": code["system"], "code": code["code"], "description": code.get("description") or ""})
    return rows + [{"system": "", "code": "", "description": ""} for _ in range(max(CODE_ROWS - len(rows), 1))]


def _render_determination(container, rows, comment="", errors=None, status=200):
    errors = errors or {}
    return render_template("pages/determination.html", container=dump_container(container), rows=rows,
                           comment=comment, errors=errors, summary=list(errors.items()),
                           systems=vocab.WASTE_CODE_SYSTEMS), status


@bp.get("/waste/<int:ident>/determination", endpoint="container_determination")
def determination_form(ident: int):
    container = _visible(ident)
    return _render_determination(container, _suggested_rows(dump_container(container)))


@bp.post("/waste/<int:ident>/determination", endpoint="container_determine")
def determination_submit(ident: int):
    container = _visible(ident)
    rows = _code_rows(request.form)
    kept = [i for i, r in enumerate(rows) if r["code"].strip() or r["description"].strip()]
    comment = request.form.get("comment", "")
    data = {"codes": [{"system": rows[i]["system"], "code": rows[i]["code"],
                       **({"description": rows[i]["description"]} if rows[i]["description"].strip() else {})}
                      for i in kept],
            "comment": comment if comment.strip() else None}
    try:
        body = DeterminationIn.model_validate(data)
    except ValidationError as exc:
        errors: dict[str, str] = {}
        for err in exc.errors():
            loc = err["loc"]
            field = (f"codes-{kept[loc[1]]}-{loc[2] if len(loc) > 2 else 'code'}"
                     if loc[0] == "codes" and len(loc) > 1 and isinstance(loc[1], int) else str(loc[0]))
            errors.setdefault(field, field_message(err))
        return _render_determination(container, rows, comment, errors, 422)
    waste.determine(get_session(), container.id, body, current_user().id)
    return redirect(url_for("web.container", ident=ident, done="determined"), 303)


# --- accumulation areas ---------------------------------------------------------------------------


@bp.get("/areas", endpoint="areas")
def area_list():
    query = PageQuery.model_validate(request.args.to_dict())
    page = areas.list_areas(get_session(), lab_ids=lab_scope(), limit=query.limit, offset=query.offset)
    return render_template("pages/areas.html", areas=[dump_area(a) for a in page], page=page)


@bp.get("/areas/<int:ident>", endpoint="area")
def area_page(ident: int):
    location = areas.get_area(get_session(), ident)
    if location.lab_id is not None:
        check_lab(location.lab_id)
    found = waste.list_containers(get_session(), lab_ids=lab_scope(), location_id=location.id, limit=None)
    here = [dump_container(c) for c in found if c.state in areas.OPEN_STATES]
    return render_template("pages/area.html", area=dump_area(location), containers=here)
