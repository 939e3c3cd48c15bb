"""Accumulation areas and the generator category as people see them.

An area's totals are :func:`service.rules.area_measures.area_totals` (the sums its rules judge), in
litres and US gallons; ``limits`` lists every active area rule with the value it compares, so a
page or client sees how far each limit is; the findings are evaluated once per area per request.
The generator report shows, per calendar month, the kg counted, the category its rules give and
the month that moved it.
"""

from __future__ import annotations

from decimal import Decimal

from service import vocab
from service.appdata import active_rules
from service.present.serialize import finding
from service.rules import Finding, LayeredRules, highest_level
from service.rules.area_measures import LITRES_PER_US_GALLON, area_totals, gallons
from service.rules.generator import MonthCategory
from service.rules.registry import plain
from service.store import areas
from service.store.db import get_session
from service.store.findings import evaluate_once
from service.store.models import Location

__all__ = ["CAUTION", "GENERATOR_CAUTION", "area_findings", "dump_area", "dump_generator"]

CAUTION = ("Accumulation limits and clocks are computed from the entries recorded here, as suggestions for "
           "review. Whether an area is within its limits, and what must be moved when, rests with the site "
           "safety officer and the regulations that apply at your site.")
GENERATOR_CAUTION = ("The generator category is computed from the waste entries recorded here, liquids weighed "
                     "by volume × density; it is a suggestion for review. The site's category, its notification "
                     "and the conditions that follow rest with the site safety officer and the regulations "
                     "that apply at your site (state rules may differ).")
_QUART_L = LITRES_PER_US_GALLON / 4  # NIST Handbook 44 Appendix C: 1 US quart = 0.946352946 L


def area_findings(location: Location) -> list[Finding]:
    """The area rules' findings for ``location`` (none for a location that is not an accumulation area)."""
    if not areas.is_area(location):
        return []
    session = get_session()
    return evaluate_once(session, active_rules(), "accumulation_area", location.id, areas.subject_of(session, location))


def _limits(rules: LayeredRules, subject, fired: set[str]) -> list[dict]:
    rows = []
    for active in rules.rules_for("accumulation_area"):
        result = active.definition.compute(subject, active.argument)
        if result is None:
            continue
        rows.append({"rule_id": active.id, "level": active.level, "measure": active.measure,
                     "comparator": active.rule.comparator, "threshold": active.rule.threshold,
                     "threshold_value": float(active.threshold_value), "value": result.value, "unit": result.unit,
                     "exceeded": active.id in fired})
    return rows


def dump_area(location: Location) -> dict:
    session = get_session()
    rules = active_rules()
    subject = areas.subject_of(session, location)
    findings = area_findings(location)
    totals = area_totals(subject)
    since = location.over_limit_since
    return {
        "id": location.id, "label": areas.label_of(location), "kind": location.kind, "lab_id": location.lab_id,
        "building": location.building, "room": location.room, "storage": location.storage,
        "containers": [{"label": c.label, "form": c.form, "volume_l": c.volume_l, "mass_kg": c.mass_kg,
                        "acute_hazardous": c.acute_hazardous} for c in subject.containers],
        "totals": {
            "containers": totals.containers,
            "non_acute_volume_l": plain(totals.non_acute_liquid_l),
            "non_acute_volume_gal": plain(gallons(totals.non_acute_liquid_l)),
            "non_acute_solid_kg": plain(totals.non_acute_solid_kg),
            "acute_liquid_l": plain(totals.acute_liquid_l),
            "acute_liquid_quart": plain((totals.acute_liquid_l / _QUART_L).quantize(Decimal("0.000001"))),
            "acute_solid_kg": plain(totals.acute_solid_kg),
            "solids_not_in_volume": list(totals.solid_labels),
        },
        "limits": _limits(rules, subject, {f.rule_id for f in findings}),
        "over_limit_since": since.isoformat() if since else None, "days_over_limit": subject.days_over_limit,
        "findings": [finding(f) for f in findings], "highest_level": highest_level(findings),
        "rule_packs": [{"pack": n, "version": v} for n, v in rules.packs],
        "opt_ins": list(rules.opt_ins), "caution": CAUTION,
    }


def dump_generator(months: list[MonthCategory], rules: LayeredRules, since: str, until: str) -> dict:
    """The generator report: per month the kg counted, the category, whether it moved, the findings."""
    counting = rules.waste_counting
    rows = []
    for month in months:
        s = month.subject
        rows.append({"month": s.month, "non_acute_kg": plain(s.non_acute_kg), "acute_kg": plain(s.acute_kg),
                     "entries": s.entries, "assumed_density_l": plain(s.assumed_density_l),
                     "category": month.category, "previous_category": month.previous, "moved": month.moved,
                     "findings": [finding(f) for f in month.findings]})
    order = [m.category for m in months]
    highest = max(order, key=vocab.GENERATOR_CATEGORIES.index) if order else None
    return {
        "report": "generator_category", "since": since, "until": until, "months": rows,
        "highest_category": highest, "moved_in": [r["month"] for r in rows if r["moved"]],
        "counted_streams": list(counting.streams) if counting else [],
        "assumed_density": counting.assumed_density if counting else None,
        "assumed_density_source": counting.source if counting else None,
        "assumed_density_used": any(m.subject.assumed_density_l for m in months),
        "units": {"non_acute_kg": "kg", "acute_kg": "kg", "assumed_density_l": "L"},
        "rule_packs": [{"pack": n, "version": v} for n, v in rules.packs], "caution": GENERATOR_CAUTION,
    }


