"""The waste manifest's data: a container's JSON view plus generator, codes and transport.

Pure: takes the container as ``dump_container`` gives it (volumes, fill and concentrations
as the container measures compute them, with the concentration basis), its entries as
``dump_entry`` gives them, and the catalogue records of its constituents; returns the
JSON-ready dict the template renders and the hash covers. Codes the safety officer confirmed
(the container's ``determination``) print as confirmed, with who and when; every other code and the
transport description print as suggestions for review. One UN entry is suggested, chosen by the rule
of ``rules/transport-suggestions.yaml``; the others are listed as not chosen, with why.
"""

from __future__ import annotations

from service.documents.controls import TransportFile, transport_choice

__all__ = ["DEFERRAL", "SHIPMENT_FIELDS", "manifest_data", "suggested_codes", "code_sections", "entry_rows", "hazard_rows"]

DEFERRAL = ("Waste codes marked suggested, hazard classes and transport descriptions on this manifest are suggestions "
            "from the records and the active rule packs, for review; codes marked confirmed are the site safety "
            "officer's determination as recorded. The waste determination and the approval rest with the regulations "
            "that apply where you work and with the site safety officer, who decide; shipping papers are the "
            "licensed shipper's responsibility.")
# What the manifest prints about the shipment (ManifestQuery's fields); one left out prints as a line to fill by hand.
SHIPMENT_FIELDS = ("transporter", "receiving_facility", "container_count", "container_type")


def suggested_codes(findings: list[dict]) -> list[dict]:
    """The distinct suggested waste codes of the findings, each with the rules that gave it.

    >>> suggested_codes([{"rule_id": "a", "suggested_code": {"system": "RCRA", "code": "D006", "description": "Cd"}},
    ...                  {"rule_id": "b", "suggested_code": None},
    ...                  {"rule_id": "c", "suggested_code": {"system": "RCRA", "code": "D006", "description": "Cd"}}])
    [{'system': 'RCRA', 'code': 'D006', 'description': 'Cd', 'rules': ['a', 'c']}]
    """
    out: dict[tuple[str, str], dict] = {}
    for f in findings:
        code = f.get("suggested_code")
        if code:
            row = out.setdefault((code["system"], code["code"]), {**code, "rules": []})
            row["rules"].append(f["rule_id"])
    return list(out.values())


def code_sections(determination: dict | None, suggested: list[dict]) -> dict:
    """Confirmed codes (the determination in force) and the suggestions it does not confirm.

    >>> s = code_sections({"codes": [{"system": "RCRA", "code": "D006", "description": None}],
    ...                    "by": {"id": 2, "name": "S. Officer"}, "at": "2026-12-01T09:00:00+00:00", "comment": None},
    ...                   [{"system": "RCRA", "code": "D006", "description": "Cd", "rules": ["a"]},
    ...                    {"system": "RCRA", "code": "D001", "description": "ign.", "rules": ["b"]}])
    >>> [(c["code"], c["suggested_by"]) for c in s["confirmed"]], [c["code"] for c in s["for_review"]]
    ([('D006', ['a'])], ['D001'])
    >>> s["status"]
    'Confirmed by S. Officer on 2026-12-01 09:00 UTC'
    >>> code_sections(None, [])["status"]
    'NOT CONFIRMED — no determination recorded; every code below is a suggestion for review'
    """
    rules_of = {(c["system"], c["code"]): c["rules"] for c in suggested}
    if determination is None:
        return {"status": "NOT CONFIRMED — no determination recorded; every code below is a suggestion for review",
                "confirmed": [], "by": None, "at": None, "comment": None, "for_review": suggested}
    confirmed = [{**c, "suggested_by": rules_of.get((c["system"], c["code"]), [])} for c in determination["codes"]]
    keys = {(c["system"], c["code"]) for c in confirmed}
    at = determination["at"]
    return {"status": f"Confirmed by {determination['by']['name']} on {at[:16].replace('T', ' ')} UTC",
            "confirmed": confirmed, "by": determination["by"]["name"], "at": at, "comment": determination["comment"],
            "for_review": [c for c in suggested if (c["system"], c["code"]) not in keys]}


def entry_rows(entries: list[dict]) -> list[dict]:
    """The entry list as printed: a reversed entry says which entry reversed it, a reversal which it reverses.

    >>> [(r["id"], r["reversed_by"], r["reversal_of"]) for r in entry_rows([
    ...     {"id": 1, "at": "t", "description": "wash", "volume_ml": 5.0, "mass_g": 0.0, "reverses_entry_id": None,
    ...      "elements": []},
    ...     {"id": 2, "at": "t", "description": "reverses entry 1: typo", "volume_ml": -5.0, "mass_g": 0.0,
    ...      "reverses_entry_id": 1, "elements": []}])]
    [(1, 2, None), (2, None, 1)]
    """
    reversed_by = {e["reverses_entry_id"]: e["id"] for e in entries if e["reverses_entry_id"]}
    return [{k: e[k] for k in ("id", "at", "description", "volume_ml", "mass_g")}
            | {"reversal_of": e["reverses_entry_id"], "reversed_by": reversed_by.get(e["id"]),
               "elements": [{"element": x["element"], "mass_ug": x["mass_ug"]} for x in e["elements"]]}
            for e in entries]


def hazard_rows(constituents: list[dict], text_of) -> list[dict]:
    """Each constituent's GHS data from its catalogue record (``record``; none: no hazard data), H-statements with text."""
    rows = []
    for c in constituents:
        hazard = (c.get("record") or {}).get("hazard") or {}
        rows.append({"substance": c["substance"], "signal_word": hazard.get("signal_word"),
                     "pictograms": sorted(hazard.get("pictograms") or ()),
                     "h_statements": [{"code": h, "text": text_of(h) or "(no text in hazard-statements.yaml)"}
                                      for h in hazard.get("h_statements") or ()]})
    return rows


def manifest_data(view: dict, *, entries: list[dict], records: dict[str, dict], lab: dict, location: dict,
                  site: str, page_size: str, generated_at: str, document_id: str, transport: TransportFile,
                  text_of, shipment: dict) -> dict:
    """The dict the manifest template renders (and whose canonical JSON is hashed).

    ``records`` maps a constituent's catalogue key to its substance record (for hazards); ``shipment``
    gives the ``SHIPMENT_FIELDS`` (None: a blank line to fill by hand).
    """
    constituents = [{**c, "record": records.get(c["key"])} for c in view["solvent_composition"]]
    elements = [{k: e[k] for k in ("element", "mass_ug", "concentration_mg_per_l", "concentration_mg_per_kg")}
                for e in view["elements"]]
    present = {e["element"] for e in elements if e["mass_ug"] > 0}
    choice = transport_choice(transport, view["stream"], present, {c["key"] for c in constituents})
    technical = [c["substance"] for c in sorted(constituents, key=lambda c: -c["volume_percent"])[:2]]
    technical += [e["element"] for e in sorted(elements, key=lambda e: -e["mass_ug"]) if e["mass_ug"] > 0]
    return {
        "kind": "waste manifest", "document_id": document_id, "site": site, "lab": lab, "location": location,
        "generated_at": generated_at, "page_size": page_size,
        "container": {k: view[k] for k in ("id", "label", "stream", "form", "capacity", "acute_hazardous", "state",
                                           "first_entry_at", "full_at", "pickup_requested_at", "collected_at",
                                           "volume_l", "mass_kg", "fill_percent", "filterable_solids_percent",
                                           "concentration_basis", "concentration_note", "highest_level")},
        "stream_title": choice["title"],
        "constituents": [{"substance": c["substance"], "key": c["key"], "volume_percent": c["volume_percent"]}
                         for c in constituents],
        "elements": elements,
        "hazards": hazard_rows(constituents, text_of),
        "metals_present": sorted(present),
        "codes": code_sections(view["determination"], suggested_codes(view["findings"])),
        "transport": {"rule": choice["rule"], "not_chosen": choice["not_chosen"],
                      "chosen": {**choice["chosen"], "technical_names": technical} if choice["chosen"] else None},
        "transport_version": transport.version,
        "shipment": {k: shipment.get(k) for k in SHIPMENT_FIELDS},
        "entries": entry_rows(entries),
        "findings": [{k: f[k] for k in ("rule_id", "pack", "pack_version", "level", "message", "source")}
                     for f in view["findings"]],
        "rule_packs": view["rule_packs"],
        "caution": view["caution"],
        "deferral": DEFERRAL,
        "sign_off": ["Generator", "Safety officer", "Transporter", "Receiving facility"],
    }
