"""A procedure as people see it: steps, draws, element masses per batch and, for one record, its findings."""

from __future__ import annotations

from service.appdata import active_rules
from service.present.serialize import element_rows_from, finding
from service.store import procedures
from service.store.db import get_session
from service.store.models import Procedure

__all__ = ["CAUTION", "dump_procedure"]

CAUTION = ("Findings are suggestions from the active rule packs. Approval rests with the site safety "
           "officer and local regulations decide; check every value before you rely on it.")


def _draw(draw, reagent) -> dict:
    source = draw.stock or draw.mixture
    return {
        "position": draw.position,
        "stock_id": draw.stock_id,
        "mixture_id": draw.mixture_id,
        "label": source.label,
        "name": reagent.name,
        "amount": draw.amount_text,
        "step": draw.step,
        "elements": element_rows_from(reagent.element_mass_ug),
    }


def dump_procedure(proc: Procedure, *, with_findings: bool = True) -> dict:
    session = get_session()
    subject = procedures.subject_of(proc)
    out = {
        "id": proc.id, "family_id": proc.family_id, "revision": proc.revision, "revision_of_id": proc.revision_of_id,
        "lab_id": proc.lab_id, "researcher_id": proc.researcher_id, "title": proc.title, "summary": proc.summary,
        "scale": proc.scale, "state": proc.state,
        "submitted_at": proc.submitted_at.isoformat() if proc.submitted_at else None,
        "decided_at": proc.decided_at.isoformat() if proc.decided_at else None,
        "decided_by_id": proc.decided_by_id, "decision_comment": proc.decision_comment,
        "steps": [{"position": s.position, "operation": s.operation, "temperature_c": s.temperature_c,
                   "atmosphere": s.atmosphere, "duration_min": s.duration_min, "note": s.note} for s in proc.steps],
        "draws": [_draw(d, r) for d, r in zip(proc.draws, subject.reagents)],
        "waste_plan": [{"position": w.position, "stream": w.stream, "contents": w.contents,
                        "expected_amount": w.expected_amount} for w in proc.waste_plan],
        "element_masses_per_batch": element_rows_from(procedures.element_totals_ug(subject)),
    }
    if with_findings:
        findings = procedures.findings_of(session, proc, active_rules(), reagents=subject.reagents)
        out["findings"] = [finding(f) for f in findings]
        out["highest_level"] = procedures.highest_level(findings)
        out["rule_packs"] = [{"pack": n, "version": v} for n, v in active_rules().packs]
        out["caution"] = CAUTION
    return out
