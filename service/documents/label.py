"""A waste container's label: "Hazardous Waste", the hazards of its contents, its stream, the
accumulation start date, its id and label, and a QR code that opens the container's page for a new entry.

Pure: takes the container as ``dump_container`` gives it and the catalogue records of its
constituents; returns the JSON-ready dict the template renders and the hash covers. The hazards are
the constituents' GHS data (pictograms, signal word, H-statements) and the metals in the container;
the codes are the safety officer's determination where one is recorded, else the findings'
suggestions marked for review. The QR code is drawn from ``entry_url`` when the page is rendered
(``render.qr_data_uri``).

Sizes (``vocab.LABEL_SIZES``): one 100 mm × 150 mm label on its own page, or a whole sheet of a common
label layout with every label the same. The sheet geometry is that of the widespread office label
sheets (from memory: A4 2 × 4 labels of 99.1 mm × 67.7 mm with 13.1 mm top and 4.65 mm side margins and
2.5 mm between the columns; US Letter 2 × 3 labels of 4 in × 3 1/3 in with 0.5 in top and 0.156 in side
margins and 0.188 in between the columns). Check the sheet you buy against :data:`LAYOUTS` before printing.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

from service import vocab
from service.documents.manifest import code_sections, hazard_rows, suggested_codes

__all__ = ["DEFERRAL", "HEADLINE", "LAYOUTS", "Layout", "label_data", "label_positions", "combined_hazards"]

HEADLINE = "Hazardous Waste"
DEFERRAL = ("Hazards and codes on this label are suggestions from the records, for review. The waste "
            "determination rests with local regulations and the site safety officer.")


@dataclass(frozen=True)
class Layout:
    """Where the labels sit on a page (millimetres) and how much each one says."""

    name: str
    title: str
    page_w: float
    page_h: float
    columns: int
    rows: int
    label_w: float
    label_h: float
    top: float
    left: float
    gap_x: float = 0.0
    gap_y: float = 0.0
    compact: bool = True  # a sheet label prints H-codes without their texts
    qr_mm: float = 26.0

    def fits(self) -> bool:
        """The labels and the margins add up to no more than the page (to the 0.1 mm of the specifications).

        >>> all(layout.fits() for layout in LAYOUTS.values())
        True
        """
        width = 2 * self.left + self.columns * self.label_w + (self.columns - 1) * self.gap_x
        height = self.top + self.rows * self.label_h + (self.rows - 1) * self.gap_y
        return width <= self.page_w + 0.1 and height <= self.page_h + 0.1


_INCH = 25.4  # mm per inch, exact by definition (1959 international yard and pound agreement)
LAYOUTS = {
    "single-100x150": Layout("single-100x150", "one label, 100 mm × 150 mm", 100.0, 150.0, 1, 1, 100.0, 150.0, 0.0,
                             0.0, compact=False, qr_mm=38.0),
    "a4-2x4": Layout("a4-2x4", "A4 sheet, 2 × 4 labels of 99.1 mm × 67.7 mm", 210.0, 297.0, 2, 4, 99.1, 67.7, 13.1,
                     4.65, gap_x=2.5),
    "letter-2x3": Layout("letter-2x3", "US Letter sheet, 2 × 3 labels of 4 in × 3 1/3 in", 8.5 * _INCH, 11 * _INCH,
                         2, 3, 4 * _INCH, 10 / 3 * _INCH, 0.5 * _INCH, 0.15625 * _INCH, gap_x=0.1875 * _INCH,
                         qr_mm=30.0),
}
assert tuple(LAYOUTS) == vocab.LABEL_SIZES, "a label size without a layout, or a layout without a size"


def label_positions(layout: Layout) -> list[dict]:
    """The top-left corner of every label of the page (mm), row by row.

    >>> [(round(p["left"], 2), round(p["top"], 2)) for p in label_positions(LAYOUTS["a4-2x4"])][:3]
    [(4.65, 13.1), (106.25, 13.1), (4.65, 80.8)]
    """
    return [{"left": layout.left + c * (layout.label_w + layout.gap_x), "top": layout.top + r * (layout.label_h + layout.gap_y)}
            for r in range(layout.rows) for c in range(layout.columns)]


# GHS: "Danger" for the more severe hazard categories, "Warning" for the less severe (GHS Rev. 9, chapter 1.4;
# from memory).
_SIGNAL_ORDER = ("Warning", "Danger")


def combined_hazards(rows: list[dict]) -> dict:
    """The hazards of a mixture of constituents as a label lists them: every pictogram and H-statement once,
    the more severe signal word, and which constituents have no hazard data.

    This is a list of the constituents' own hazards, not a classification of the mixture (which the
    GHS mixture rules and the safety officer decide).

    >>> h = combined_hazards([
    ...     {"substance": "acetone", "signal_word": "Danger", "pictograms": ["GHS02", "GHS07"],
    ...      "h_statements": [{"code": "H225", "text": "Highly flammable liquid and vapour"}]},
    ...     {"substance": "hexane", "signal_word": "Warning", "pictograms": ["GHS02", "GHS08"],
    ...      "h_statements": [{"code": "H225", "text": "Highly flammable liquid and vapour"}]},
    ...     {"substance": "water", "signal_word": None, "pictograms": [], "h_statements": []}])
    >>> h["signal_word"], h["pictograms"], [s["code"] for s in h["h_statements"]], h["without_data"]
    ('Danger', ['GHS02', 'GHS07', 'GHS08'], ['H225'], ['water'])
    """
    words = {r["signal_word"] for r in rows if r["signal_word"] in _SIGNAL_ORDER}
    statements: dict[str, dict] = {}
    for r in rows:
        for s in r["h_statements"]:
            statements.setdefault(s["code"], s)
    return {"signal_word": max(words, key=_SIGNAL_ORDER.index) if words else None,
            "pictograms": sorted({p for r in rows for p in r["pictograms"]}),
            "h_statements": [statements[code] for code in sorted(statements)],
            "without_data": [r["substance"] for r in rows if not (r["signal_word"] or r["pictograms"] or r["h_statements"])]}


def label_data(view: dict, *, records: dict[str, dict], lab: dict, location: dict, site: str, generated_at: str,
               document_id: str, entry_url: str, size: str, text_of) -> dict:
    """The dict the label template renders (and whose canonical JSON is hashed).

    ``records`` maps a constituent's catalogue key to its substance record; ``entry_url`` is the absolute
    address of the container's page for a new entry (the QR code's payload); ``size`` a key of :data:`LAYOUTS`.
    """
    layout = LAYOUTS[size]
    constituents = [{**c, "record": records.get(c["key"])} for c in view["solvent_composition"]]
    codes = code_sections(view["determination"], suggested_codes(view["findings"]))
    metals = [{"element": e["element"], "mass_ug": e["mass_ug"]}
              for e in sorted(view["elements"], key=lambda e: -e["mass_ug"]) if e["mass_ug"] > 0]
    first = view["first_entry_at"]
    return {
        "kind": "container label", "document_id": document_id, "site": site, "lab": lab, "location": location,
        "generated_at": generated_at, "headline": HEADLINE,
        "container": {k: view[k] for k in ("id", "label", "stream", "form", "capacity", "acute_hazardous", "state")},
        "stream": view["stream"].replace("_", " "),
        "accumulation_start": first[:10] if first else None,
        "hazards": combined_hazards(hazard_rows(constituents, text_of)),
        "metals": metals,
        "constituents": [{"substance": c["substance"], "volume_percent": c["volume_percent"]}
                         for c in sorted(constituents, key=lambda c: -c["volume_percent"])],
        "codes": {"confirmed": [f"{c['system']} {c['code']}" for c in codes["confirmed"]],
                  "suggested": [f"{c['system']} {c['code']}" for c in codes["for_review"]],
                  "status": codes["status"]},
        "entry_url": entry_url,
        "layout": asdict(layout),
        "positions": label_positions(layout),
        "rule_packs": view["rule_packs"],
        "caution": view["caution"],
        "deferral": DEFERRAL,
    }
