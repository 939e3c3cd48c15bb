"""The risk-assessment sheet's data: a procedure's JSON view plus hazards, controls and sign-off.

Pure: takes the procedure as ``dump_procedure`` gives it and the facts around it (the
substances behind each draw, lab, researcher, the controls file, the H-statement texts)
and returns the JSON-ready dict the template renders and the hash covers.
"""

from __future__ import annotations

from service.documents.controls import ControlsFile, Facts, applicable

__all__ = ["DEFERRAL", "assessment_data", "approval_status", "substance_row", "hazard_texts"]

DEFERRAL = ("This sheet is an aid to planning and review, generated from the records and the active rule packs. "
            "It is not a classification, an approval or a waste determination: those rest with the regulations "
            "that apply where you work and with the site safety officer, who decide.")

_SIGNAL_RANK = {"Danger": 2, "Warning": 1, None: 0}


def substance_row(draw: dict, substances: list[dict]) -> dict:
    """One table row: a draw with the GHS data of the substance(s) behind it.

    ``substances`` are catalogue records as dicts (``name``, ``state``, ``flash_point_c``,
    ``hazard``, ``flags``); a mixture has one per component.

    >>> row = substance_row({"position": 1, "label": "S1", "name": "CdO", "amount": "25 mg", "elements": []},
    ...     [{"name": "cadmium oxide", "state": "solid", "flash_point_c": None, "flags": ["carcinogen"],
    ...       "hazard": {"signal_word": "Danger", "pictograms": ["GHS08", "GHS06"], "h_statements": ["H350"]}}])
    >>> row["pictograms"], row["h_statements"], row["signal_word"]
    (['GHS06', 'GHS08'], ['H350'], 'Danger')
    """
    pictograms: set[str] = set()
    codes: list[str] = []
    signal = None
    for sub in substances:
        hazard = sub.get("hazard") or {}
        pictograms.update(hazard.get("pictograms") or ())
        codes.extend(c for c in hazard.get("h_statements") or () if c not in codes)
        word = hazard.get("signal_word")
        signal = word if _SIGNAL_RANK.get(word, 0) > _SIGNAL_RANK.get(signal, 0) else signal
    flash = [s["flash_point_c"] for s in substances if s.get("state") == "liquid" and s.get("flash_point_c") is not None]
    return {
        "position": draw["position"], "label": draw["label"], "name": draw["name"], "amount": draw["amount"],
        "components": [s["name"] for s in substances] if len(substances) > 1 else [],
        "elements": [{"element": e["element"], "mass_ug": e["mass_ug"]} for e in draw["elements"]],
        "pictograms": sorted(pictograms), "h_statements": codes, "signal_word": signal,
        "flash_point_c": min(flash) if flash else None,
    }


def hazard_texts(rows: list[dict], text_of) -> list[dict]:
    """Every H-code used in ``rows`` once, in first-seen order, with its full text."""
    seen: list[str] = []
    for row in rows:
        seen.extend(c for c in row["h_statements"] if c not in seen)
    return [{"code": c, "text": text_of(c) or "(no text in hazard-statements.yaml — check the catalogue)"} for c in seen]


def approval_status(state: str, decided_at: str | None, decider: str | None) -> dict:
    """Whether the sheet describes an approved procedure, and the line every page prints about it.

    A draft says DRAFT; a procedure submitted, sent back for changes or declined says NOT APPROVED
    with its state; a retired one says RETIRED. Only an approved procedure carries no marker.

    >>> approval_status("draft", None, None)["text"]
    'DRAFT — not approved (state: draft)'
    >>> approval_status("submitted", None, None)["text"]
    'NOT APPROVED — submitted, awaiting the safety officer (state: submitted)'
    >>> approval_status("changes_requested", "2026-12-01T09:00:00+00:00", "S. Officer")["marker"]
    'NOT APPROVED'
    >>> approval_status("declined", "2026-12-01T09:00:00+00:00", "S. Officer")["text"]
    'NOT APPROVED — declined 2026-12-01 by S. Officer (state: declined)'
    >>> approval_status("approved", "2026-12-01T09:00:00+00:00", "S. Officer")
    {'approved': True, 'marker': None, 'text': 'Approved 2026-12-01 by S. Officer'}
    >>> approval_status("retired", "2026-12-01T09:00:00+00:00", "S. Officer")["text"]
    'RETIRED — no longer approved (state: retired)'
    """
    day = (decided_at or "")[:10] or "on an unrecorded date"
    who = decider or "an unrecorded user"
    if state == "approved":
        return {"approved": True, "marker": None, "text": f"Approved {day} by {who}"}
    if state == "retired":
        return {"approved": False, "marker": "RETIRED", "text": "RETIRED — no longer approved (state: retired)"}
    if state == "draft":
        return {"approved": False, "marker": "DRAFT", "text": "DRAFT — not approved (state: draft)"}
    how = {"submitted": "submitted, awaiting the safety officer",
           "changes_requested": f"changes requested {day} by {who}",
           "declined": f"declined {day} by {who}"}.get(state, state.replace("_", " "))
    return {"approved": False, "marker": "NOT APPROVED", "text": f"NOT APPROVED — {how} (state: {state})"}


def _facts(view: dict, substances: list[list[dict]]) -> Facts:
    return Facts(
        measures=frozenset(f["measure"].split(":", 1)[0] for f in view.get("findings", [])),
        flags=frozenset(flag for subs in substances for s in subs for flag in s.get("flags") or ()),
        operations=frozenset(s["operation"] for s in view["steps"]),
        atmospheres=frozenset(s["atmosphere"] for s in view["steps"] if s["atmosphere"]),
        elements=frozenset(e["element"] for e in view["element_masses_per_batch"] if e["mass_ug"] > 0),
    )


def assessment_data(view: dict, *, substances: list[list[dict]], lab: dict, researcher: str, decider: str | None,
                    site: str, page_size: str, generated_at: str, document_id: str, controls: ControlsFile, text_of,
                    followed_elements: tuple[str, ...]) -> dict:
    """The dict the risk-assessment template renders (and whose canonical JSON is hashed).

    ``substances[i]`` are the catalogue records behind ``view["draws"][i]``; ``decider`` names who
    took the last decision (printed with an approval; any other state prints a DRAFT marker); ``text_of``
    maps an H-code to its standard text; ``followed_elements`` are the metals the waste
    plan reports (the mass-balance elements).
    """
    rows = [substance_row(d, subs) for d, subs in zip(view["draws"], substances)]
    for row in rows:
        row["metals"] = [e for e in row["elements"] if e["element"] in followed_elements]
    facts = _facts(view, substances)
    metals = [e for e in view["element_masses_per_batch"] if e["element"] in followed_elements and e["mass_ug"] > 0]
    return {
        "kind": "risk assessment", "document_id": document_id, "site": site, "lab": lab, "researcher": researcher,
        "generated_at": generated_at, "page_size": page_size,
        "procedure": {k: view[k] for k in ("id", "family_id", "revision", "title", "summary", "scale", "state",
                                           "submitted_at", "decided_at", "decision_comment", "highest_level")},
        "approval": approval_status(view["state"], view["decided_at"], decider),
        "steps": view["steps"],
        "substances": rows,
        "h_statements": hazard_texts(rows, text_of),
        "element_masses_per_batch": [{"element": e["element"], "mass_ug": e["mass_ug"],
                                      "followed": e["element"] in followed_elements}
                                     for e in view["element_masses_per_batch"]],
        "hazards": [h.model_dump() for h in applicable(controls.hazards, facts)],
        "emergency": [e.model_dump() for e in applicable(controls.emergency, facts)],
        "controls_version": controls.version,
        "waste_plan": [{**w, "metals_up_to": [{"element": m["element"], "mass_ug": m["mass_ug"]} for m in metals]}
                       for w in view["waste_plan"]],
        "findings": [{k: f[k] for k in ("rule_id", "pack", "pack_version", "level", "message", "source", "detail")}
                     for f in view.get("findings", [])],
        "rule_packs": view.get("rule_packs", []),
        "caution": view.get("caution", ""),
        "deferral": DEFERRAL,
        "sign_off": ["Researcher", "Supervisor", "Safety officer"],
    }
