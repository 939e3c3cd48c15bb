"""The waste manifest's data: a container's JSON view plus generator, codes and transport.

Pure: takes the container as ``dump_container`` gives it (volumes, fill and concentrations
as the container measures compute them, with the concentration basis), its entries as
``dump_entry`` gives them, and the catalogue records of its constituents; returns the
JSON-ready dict the template renders and the hash covers. Codes and transport descriptions are
suggestions for review only.
"""

from __future__ import annotations

from service.documents.controls import TransportFile, transport_candidates

__all__ = ["DEFERRAL", "manifest_data", "suggested_codes"]

DEFERRAL = ("Suggested — for review. Waste codes, hazard classes and transport descriptions on this manifest are "
            "suggestions from the records and the active rule packs. The waste determination and the approval rest "
            "with the regulations that apply where you work and with the site safety officer, who decide; shipping "
            "papers are the licensed shipper's responsibility.")


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


def _hazards(constituents: list[dict], text_of) -> list[dict]:
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
                  text_of) -> dict:
    """The dict the manifest template renders (and whose canonical JSON is hashed).

    ``records`` maps a constituent's catalogue key to its substance record (for hazards).
    """
    constituents = [{**c, "record": records.get(c["key"])} for c in view["solvent_composition"]]
    elements = [{k: e[k] for k in ("element", "mass_ug", "concentration_mg_per_l", "concentration_mg_per_kg")}
                for e in view["elements"]]
    present = {e["element"] for e in elements if e["mass_ug"] > 0}
    title, candidates = transport_candidates(transport, view["stream"], present, {c["key"] for c in constituents})
    technical = [c["substance"] for c in sorted(constituents, key=lambda c: -c["volume_percent"])[:2]]
    technical += [e["element"] for e in sorted(elements, key=lambda e: -e["mass_ug"]) if e["mass_ug"] > 0]
    return {
        "kind": "waste manifest", "document_id": document_id, "site": site, "lab": lab, "location": location,
        "generated_at": generated_at, "page_size": page_size,
        "container": {k: view[k] for k in ("id", "label", "stream", "form", "capacity", "acute_hazardous", "state",
                                           "first_entry_at", "full_at", "pickup_requested_at", "collected_at",
                                           "volume_l", "mass_kg", "fill_percent", "filterable_solids_percent",
                                           "concentration_basis", "concentration_note", "highest_level")},
        "stream_title": title,
        "constituents": [{"substance": c["substance"], "key": c["key"], "volume_percent": c["volume_percent"]}
                         for c in constituents],
        "elements": elements,
        "hazards": _hazards(constituents, text_of),
        "metals_present": sorted(present),
        "suggested_codes": suggested_codes(view["findings"]),
        "transport": [{**c.model_dump(), "technical_names": technical} for c in candidates],
        "transport_version": transport.version,
        "entries": [{k: e[k] for k in ("id", "at", "description", "volume_ml", "mass_g", "reverses_entry_id")}
                    | {"elements": [{"element": x["element"], "mass_ug": x["mass_ug"]} for x in e["elements"]]}
                    for e in entries],
        "findings": [{k: f[k] for k in ("rule_id", "pack", "pack_version", "level", "message", "source")}
                     for f in view["findings"]],
        "rule_packs": view["rule_packs"],
        "caution": view["caution"],
        "deferral": DEFERRAL,
        "sign_off": ["Generator", "Safety officer", "Transporter"],
    }
