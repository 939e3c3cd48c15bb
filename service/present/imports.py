"""A spreadsheet import's report as the API answers it and the import page shows it."""

from __future__ import annotations

import dataclasses
from typing import Any

from service.store.importer import ImportReport

__all__ = ["CAUTION", "dump_report"]

CAUTION = ("Element content is computed from each substance's formula, the amount and the purity as read; "
           "check the rows against the containers on the shelf. Hazard classification and storage rules rest "
           "with your site safety officer and local regulations.")


def dump_report(report: ImportReport, filename: str) -> dict[str, Any]:
    """Every row as read and what became of it, with the counts; ``withheld``: a real run that wrote nothing."""
    return {
        "file": filename,
        "dry_run": report.dry_run,
        "only_valid": report.only_valid,
        "rows": report.rows,
        "accepted": report.accepted,
        "rejected": len(report.rejected),
        "imported": report.imported,
        "withheld": report.withheld,
        "locations_created": report.locations_created,
        "lines": [dataclasses.asdict(line) for line in report.lines],
        "caution": CAUTION,
    }
