"""A waste container and its entries as people see them.

Volume, mass, fill, filterable solids and concentrations are the values the container
measures compute (:mod:`service.rules.container_measures`, exact Decimal), so what a page,
the API or a manifest shows is what the rules judge. Where the liquid is not itself the
toxicity-characteristic extract (0.5 % filterable solids or more, 40 CFR 261.24(a)) no mg/L is
given, and ``concentration_basis`` / ``concentration_note`` say so and why.
"""

from __future__ import annotations

from decimal import ROUND_HALF_EVEN, Decimal

from markupsafe import Markup

from service.appdata import active_rules
from service.chem.figures import percent_text
from service.present.charts import line_chart
from service.present.areas import area_findings
from service.present.serialize import element_rows_from, finding
from service.rules import SEVERITY, highest_level
from service.rules.container_measures import (
    concentration_basis,
    concentration_mg_per_l,
    fill_fraction,
    filterable_solids_percent,
    mass_kg,
    mg_per_kg,
    volume_l,
)
from service.rules.registry import dec, plain
from service.rules.subjects import ContainerSubject
from service.store import waste
from service.store.amounts import mg_text
from service.store.db import get_session
from service.store.findings import evaluate_once
from service.store import areas
from service.store.models import WasteContainer, WasteEntry

__all__ = ["CAUTION", "dump_container", "dump_determination", "dump_entry", "basis_note", "amounts", "concentrations",
           "history_charts", "running_totals"]

CAUTION = ("Waste codes and transport descriptions are suggestions for review. The waste determination "
           "rests with the site safety officer and local regulations; shipping papers with the licensed shipper.")


def dump_container(container: WasteContainer) -> dict:
    session = get_session()
    contents = waste.contents_of(session, container)
    subject = waste.subject_of(session, container, contents)
    rules = active_rules()
    location = areas.location_of(session, container.location_id)
    in_area = areas.is_area(location) and container.state in areas.OPEN_STATES
    # the container's own findings and, while it is in an accumulation area, the area's (the limits are per area)
    findings = sorted(evaluate_once(session, rules, "waste_container", container.id, subject)
                      + (area_findings(location) if in_area else []), key=lambda f: (-SEVERITY[f.level], f.rule_id))
    basis, note = concentration_basis(subject)
    return {
        "id": container.id, "label": container.label, "lab_id": container.lab_id, "location_id": container.location_id,
        "stream": container.stream, "form": container.form, "capacity": container.capacity_text,
        "acute_hazardous": container.acute_hazardous, "state": container.state,
        "first_entry_at": _iso(container.first_entry_at), "full_at": _iso(container.full_at),
        "pickup_requested_at": _iso(container.pickup_requested_at), "collected_at": _iso(container.collected_at),
        "entries": contents.entries, **amounts(subject, contents, container.capacity_micro),
        "concentration_basis": basis, "concentration_note": note, "ph": subject.ph,
        "elements": [{**row, **concentrations(subject, row["element"], basis)}
                     for row in element_rows_from(contents.element_mass_ug)],
        "solvent_composition": [{"substance": c.name, "key": c.key, "volume_percent": round(100 * c.volume_fraction, 3)}
                                for c in subject.components],
        "accumulation_area": ({"id": location.id, "label": areas.label_of(location), "kind": location.kind}
                              if areas.is_area(location) else None),
        "findings": [finding(f) for f in findings], "highest_level": highest_level(findings),
        "determination": dump_determination(waste.determination_of(container)),
        "rule_packs": [{"pack": n, "version": v} for n, v in rules.packs], "caution": CAUTION,
    }


def dump_determination(row) -> dict | None:
    """The safety officer's determination in force (codes, by whom, when, comment), or None."""
    if row is None:
        return None
    return {"id": row.id, "codes": [{"system": c["system"], "code": c["code"], "description": c.get("description")}
                                    for c in row.codes],
            "by": {"id": row.actor_id, "name": row.actor.display_name}, "at": _iso(row.at), "comment": row.comment}


def amounts(subject: ContainerSubject, contents: waste.Contents, capacity_micro: int) -> dict:
    """Volume, mass, fill and filterable solids as the container measures compute them (exact Decimal)."""
    if subject.form == "liquid":
        fill = fill_fraction(subject, None)
        fill_share = dec(fill.value) if fill is not None else Decimal(0)
    else:  # no rule judges a solids container's fill: the exact ratio of the stored integers
        fill_share = Decimal(contents.mass_ug) / Decimal(capacity_micro)
    return {"volume_l": volume_l(subject, None).value, "mass_kg": mass_kg(subject, None).value,
            "fill_percent": float((fill_share * 100).quantize(Decimal("0.01"), rounding=ROUND_HALF_EVEN)),
            "filterable_solids_percent": filterable_solids_percent(subject, None).value}


def concentrations(subject: ContainerSubject, element: str, basis: str) -> dict:
    """mg/L (only where the liquid is itself the TC extract) and, for solids, mg/kg of one element."""
    per_l = concentration_mg_per_l(subject, element)  # None unless the basis is "extract"
    per_kg = (plain(mg_per_kg(subject.element_mass_ug.get(element, 0), subject.mass_kg))
              if basis == "solid" and subject.mass_kg > 0 else None)
    return {"concentration_mg_per_l": per_l.value if per_l is not None else None, "concentration_mg_per_kg": per_kg}


def _iso(value):
    return value.isoformat() if value else None


def dump_entry(entry: WasteEntry) -> dict:
    return {
        "id": entry.id, "container_id": entry.container_id, "run_id": entry.run_id, "actor_id": entry.actor_id,
        "at": entry.at.isoformat(), "description": entry.description, "volume_ml": entry.volume_ul / 1000,
        "mass_g": entry.mass_ug / 1e6, "filterable_solids_percent": entry.filterable_solids_percent,
        "ph": entry.ph, "reverses_entry_id": entry.reverses_entry_id,
        "components": [{"substance_id": c.substance_id, "substance": c.substance.name,
                        "volume_ml": c.volume_ul / 1000} for c in entry.components],
        "elements": [{**row, "basis": e.basis, "basis_note": basis_note(e.basis)}
                     for e in sorted(entry.elements, key=lambda e: e.element)
                     for row in element_rows_from({e.element: e.mass_ug})],
    }


def basis_note(basis) -> str:
    """How an entry's element mass was given, in a few words (empty when it was not recorded).

    >>> basis_note({"kind": "share", "percent": 80.0, "of_ug": 17500, "remaining_ug": 3500})
    '80.0 % of the 17.5 mg the run left unaccounted (3.5 mg left)'
    >>> basis_note({"kind": "assay", "concentration": "12.5 mg/L", "volume": "4.0 mL"})
    '12.5 mg/L × 4.0 mL'
    """
    kind = (basis or {}).get("kind")
    if kind == "share":
        return (f"{percent_text(basis['percent'])} of the {mg_text(basis['of_ug'])} the run left unaccounted "
                f"({mg_text(basis['remaining_ug'])} left)")
    if kind == "assay":
        return f"{basis['concentration']} × {basis['volume']}"
    if kind == "mass":
        return f"given as {basis['mass']}"
    if kind == "reversal":
        return f"reverses entry {basis['entry_id']}"
    return ""


def running_totals(rows) -> dict[str, list[dict]]:
    """Per element, the container's content after each entry that changed it: {"at", "entry_id", "ug"}.

    ``rows`` are (time, entry id, element, µg) in the order the entries were made, reversals
    (negative µg) included, so the last point of each element is the container's total.

    >>> import datetime as dt
    >>> t = dt.datetime(2026, 3, 1)
    >>> [p["ug"] for p in running_totals([(t, 1, "Cd", 500), (t, 1, "Se", 40), (t, 2, "Cd", 250),
    ...                                    (t, 3, "Cd", -500)])["Cd"]]
    [500, 750, 250]
    """
    out: dict[str, list[dict]] = {}
    for at, entry_id, element, ug in rows:
        points = out.setdefault(element, [])
        points.append({"at": at, "entry_id": entry_id, "ug": (points[-1]["ug"] if points else 0) + ug})
    return out


def history_charts(container: WasteContainer) -> list[Markup]:
    """One step-line chart per element of the container's content over time, in mg, each with its table
    (:func:`service.present.charts.line_chart`); tracked elements first, each on its own scale."""
    from service.vocab import TRACKED_ELEMENTS

    totals = running_totals(waste.element_history(get_session(), container))
    order = {s: i for i, s in enumerate(TRACKED_ELEMENTS)}
    return [line_chart(f"{symbol} in {container.label} after each entry",
                       [(p["at"], Decimal(p["ug"]) / 1000) for p in totals[symbol]], "mg",
                       when_label="after the entry of", number=lambda v: f"{v:,.3f}")
            for symbol in sorted(totals, key=lambda s: (order.get(s, len(order)), s))]
