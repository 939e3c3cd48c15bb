"""Procedure, review and run pages, rendered from the views the JSON API uses (service.present).

The workflow buttons post to ``web.procedure_act``, which takes the same store transition as the
API's ``/procedures/<id>/<action>`` routes and lets a role do exactly what the API lets it do: the
route itself is open to every role, and the view checks the role against the API endpoint of
the action (``api.<action>_procedure`` in service.permissions).
"""

from __future__ import annotations

from flask import redirect, render_template, request, url_for
from pydantic import ValidationError

from service.appdata import active_rules
from service.auth import check_lab, current_user, lab_scope
from service.errors import Conflict, Forbidden, InvalidInput, NotFound
from service.permissions import allowed
from service.schemas import DecisionIn, PageQuery
from service.present.procedures import dump_procedure
from service.present.runs import dump_run
from service.store import inventory, procedures, runs
from service.store.db import get_session
from service.store.models import Procedure, User
from service.web import bp
from service.web.pages import TRACKED

# What each workflow action is called on a button, and the one-line notice after it.
ACTION_LABELS = {"submit": "Submit for review", "withdraw": "Withdraw", "approve": "Approve",
                 "request_changes": "Ask for changes", "decline": "Decline", "retire": "Retire"}
DONE = {"submit": "Submitted for review.", "withdraw": "Withdrawn: the procedure is a draft again.",
        "approve": "Approved.", "request_changes": "Changes requested from the researcher.",
        "decline": "Declined.", "retire": "Retired: no new runs under this revision.",
        # from the editor (service/web/editor.py)
        "created": "Saved as a draft.", "saved": "Saved.",
        "revision": "Saved as a new draft revision; the approved one stays in force until this one is approved."}
DECISIONS = ("approve", "request_changes", "decline")  # taken on the review page
# The procedure page's buttons that post straight away (no comment needed).
PAGE_ACTIONS = ("submit", "withdraw", "retire")
RUNS_SHOWN = 20  # the procedure page lists this many of its runs; the runs page has them all


def _visible(ident: int) -> Procedure:
    proc = inventory.get(get_session(), Procedure, ident)
    check_lab(proc.lab_id)
    return proc


def may_take(proc: Procedure, action: str, user: User) -> bool:
    """Whether ``user`` may take ``action`` on ``proc`` now: its state, the API's role rule, the store's own-author rule."""
    return (proc.state in procedures.TRANSITIONS[action][0] and allowed(f"api.{action}_procedure", user.role)
            and procedures.may_act(proc, action, user) is None)


def _buttons(proc: Procedure, user: User) -> dict:
    """Which links and buttons the procedure page offers this user (the server checks each again)."""
    edits = allowed("api.update_procedures", user.role)
    return {
        "edit": edits and proc.state in procedures.EDITABLE,
        "new_revision": edits and proc.state == "approved",
        "review": (proc.state == "submitted" and allowed("web.review_procedure", user.role)
                   and proc.researcher_id != user.id),
        "actions": [a for a in PAGE_ACTIONS if may_take(proc, a, user)],
        "start_run": proc.state == "approved" and allowed("web.run_new", user.role),
    }


def _decision_rows(session, proc: Procedure) -> list[dict]:
    rows = []
    for d in procedures.decisions_of(session, proc):
        actor = session.get(User, d.actor_id)
        rows.append({"at": d.at.isoformat(), "from_state": d.from_state, "to_state": d.to_state, "comment": d.comment,
                     "highest_level": d.highest_level, "name": actor.display_name if actor else "—",
                     "email": actor.email if actor else ""})
    return rows


def _procedure_context(proc: Procedure) -> dict:
    session = get_session()
    user = current_user()
    researcher = session.get(User, proc.researcher_id)
    family = procedures.list_procedures(session, family_id=proc.family_id, lab_ids=lab_scope(), limit=None)
    proc_runs = runs.list_runs(session, lab_ids=lab_scope(), procedure_id=proc.id, limit=RUNS_SHOWN)
    return {"proc": dump_procedure(proc), "tracked": TRACKED, "buttons": _buttons(proc, user),
            "runs": proc_runs, "run_rows": [dump_run(r, with_balance=False) for r in proc_runs],
            "labels": ACTION_LABELS, "decisions": _decision_rows(session, proc), "revisions": list(family),
            "researcher": researcher, "edit_url": url_for("web.procedure_edit", ident=proc.id),
            "decider": session.get(User, proc.decided_by_id) if proc.decided_by_id else None}


def _review_context(proc: Procedure) -> dict:
    user = current_user()
    view = dump_procedure(proc)
    return {"proc": view, "tracked": TRACKED, "labels": ACTION_LABELS,
            "own": proc.researcher_id == user.id,
            "decisions": [a for a in DECISIONS if may_take(proc, a, user)
                          and not (a == "approve" and view["highest_level"] == "block")],  # the store refuses it
            "needs_comment": [f for f in view["findings"] if f["level"] == "review"],
            "researcher": get_session().get(User, proc.researcher_id)}


@bp.get("/procedures", endpoint="procedures")
def procedure_list():
    query = PageQuery.model_validate(request.args.to_dict())
    found = procedures.list_procedures(get_session(), lab_ids=lab_scope(), limit=query.limit, offset=query.offset)
    return render_template("pages/procedures.html", procedures=[dump_procedure(p) for p in found], page=found)


@bp.get("/procedures/<int:ident>", endpoint="procedure")
def procedure_page(ident: int):
    done = DONE.get(request.args.get("done", ""))  # only the notices above, never the query's own text
    return render_template("pages/procedure.html", notice=done, **_procedure_context(_visible(ident)))


@bp.get("/review/<int:ident>", endpoint="review_procedure")
def review_procedure(ident: int):
    return render_template("pages/review_procedure.html", comment="", error=None, **_review_context(_visible(ident)))


@bp.post("/procedures/<int:ident>/act/<action>", endpoint="procedure_act")
def procedure_act(ident: int, action: str):
    """Take a workflow action from a page; a refusal re-renders the page it came from, with the reason."""
    if action not in procedures.TRANSITIONS:
        raise NotFound("workflow action", action)
    proc = _visible(ident)
    user = current_user()
    comment = request.form.get("comment", "")
    try:
        if not allowed(f"api.{action}_procedure", user.role):
            raise Forbidden(f"a {user.role.replace('_', ' ')} may not {ACTION_LABELS[action].lower()} a procedure")
        body = DecisionIn.model_validate({"comment": comment or None})
        procedures.transition(get_session(), proc, action, user, body.comment, active_rules())
    except (ValidationError, InvalidInput, Conflict, Forbidden) as exc:
        status, error = _refusal(exc)
        if request.form.get("from") == "review" and allowed("web.review_procedure", user.role):
            return render_template("pages/review_procedure.html", comment=comment, error=error,
                                   **_review_context(proc)), status
        return render_template("pages/procedure.html", notice=None, error=error, **_procedure_context(proc)), status
    return redirect(url_for("web.procedure", ident=proc.id, done=action), 303)


def _refusal(exc: Exception) -> tuple[int, dict]:
    """The status and the {field, message} a refused action shows on its page."""
    if isinstance(exc, ValidationError):
        first = exc.errors()[0]
        field = ".".join(str(p) for p in first["loc"]) or None
        return 422, {"field": field, "message": f"{field}: {first['msg'].removeprefix('Value error, ')}"}
    if isinstance(exc, InvalidInput):
        return 422, {"field": exc.field, "message": str(exc)}
    if isinstance(exc, Forbidden):
        return 403, {"field": None, "message": str(exc)}
    return 409, {"field": exc.field, "message": str(exc)}  # Conflict, Blocked: the state or the findings


@bp.get("/review", endpoint="review")
def review_page():
    query = PageQuery.model_validate(request.args.to_dict())
    rows = procedures.review_queue(get_session(), active_rules(), limit=query.limit, offset=query.offset)
    return render_template("pages/review.html",
                           queue=[{**dump_procedure(p, with_findings=False), "highest_level": level}
                                  for p, level in rows], page=rows)


@bp.app_context_processor
def _may():
    # The nav shows only the pages the signed-in role may open (same matrix as the check).
    def may(endpoint: str) -> bool:
        user = current_user()
        return user is not None and allowed(endpoint, user.role)

    return {"may": may}
