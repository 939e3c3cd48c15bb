"""The contributor guide lists exactly the measures the registry knows."""

from __future__ import annotations

import re
from pathlib import Path

from service.rules import vocabulary

GUIDE = Path(__file__).resolve().parents[1] / "DEVELOPERS.md"


def test_measure_table_matches_the_registry():
    text = GUIDE.read_text(encoding="utf-8")
    table = text.split("### Measure vocabulary", 1)[1].split("\n\n", 3)[2]
    documented = re.findall(r"^\| `([^`]+)` \|", table, flags=re.M)
    assert sorted(documented) == sorted(v["name"] for v in vocabulary())
