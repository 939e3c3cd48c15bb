"""Findings kept for equal facts (``service.rules.evaluate``): always those of a full evaluation.

A waste container's findings are evaluated on every read. The rules whose measures do not read the
clock (days since the first entry, days since full) give the same findings until the container's
records change, so they are kept per process; the clock rules are evaluated each time. The reference
here is the full evaluation of every rule on the subject as given (``keep=False``), over a grid of
containers around the thresholds the shipped packs hold (the regulations behind them are cited in
tests/test_rules_container.py). The shipped packs judge no container by its days, so a test pack adds
two clock rules (a 3-day and a 12-month clock, the shape of 40 CFR 262.15(a)(6) and 262.208(a), from
memory — here they only need to fire).
"""

from __future__ import annotations

import itertools
import shutil
import sys
from dataclasses import replace
from pathlib import Path

import pytest
import yaml

from service.rules.evaluate import evaluate
from service.rules.loader import load_packs
from service.rules.registry import MEASURES
from service.rules.subjects import ContainerComponent, ContainerSubject

RULES = Path(__file__).resolve().parents[1] / "rules"
ACETONE = ContainerComponent("acetone", "acetone", 1.0, -20.0, frozenset({"flammable"}))
TOLUENE_MIX = (ContainerComponent("toluene", "toluene", 0.12, 4.0, frozenset({"flammable"})),
               ContainerComponent("water", "water", 0.88))
CHLOROFORM = (ContainerComponent("chloroform", "chloroform", 0.01, None, halogenated=True, density_g_per_ml=1.498),
              ContainerComponent("water", "water", 0.99))
DAYS = (None, 0.5, 2.99, 3.0, 364.99, 365.0, 400.0)
evaluation = sys.modules["service.rules.evaluate"]  # the module (the package exports the function by its name)


def _clock_rule(rule_id: str, measure: str, threshold: str) -> dict:
    return {"id": rule_id, "scope": "waste_container", "measure": measure, "comparator": ">=", "threshold": threshold,
            "level": "review", "message": "{value} ({detail}); limit {threshold}", "source": "test pack"}


@pytest.fixture(scope="module")
def packs(tmp_path_factory):
    """The shipped packs and a test pack with two clock rules, layered after them."""
    folder = tmp_path_factory.mktemp("packs")
    for name in ("us-federal", "eu", "site-example"):
        shutil.copy(RULES / f"{name}.yaml", folder)
    clock = {"pack": "clock-test", "version": "1", "jurisdiction": "test",
             "disclaimer": "Test rules; suggestions only, the site safety officer decides.",
             "rules": [_clock_rule("test.full-three-days", "days_since_full", "3 day"),
                       _clock_rule("test.first-entry-year", "days_since_first_entry", "365 day")]}
    (folder / "clock-test.yaml").write_text(yaml.safe_dump(clock), encoding="utf-8")
    return load_packs(folder, ["us-federal", "eu", "site-example", "clock-test"])


def grid():
    """Liquid and solid containers around the shipped thresholds (D006 at 1.0 mg/L, fill limits, pH, acute)."""
    for components, cd_ug, volume_l, ph, acute in itertools.product(
            ((ACETONE,), TOLUENE_MIX, CHLOROFORM), (0, 19_999, 20_000, 25_000), (0.0, 20.0, 23.8, 25.0),
            (None, 2.0, 12.5), (False, True)):
        yield ContainerSubject("W-1", "solvent with heavy metals", "liquid", volume_l, 0.0, 25.0,
                               element_mass_ug={"Cd": cd_ug, "Se": cd_ug // 3}, components=components, ph=ph,
                               acute_hazardous=acute)
    for mass_kg, cd_ug in itertools.product((0.0, 0.5, 2.0), (0, 5_000_000)):
        yield ContainerSubject("S-1", "contaminated solids", "solid", 0.0, mass_kg, None,
                               element_mass_ug={"Cd": cd_ug}, filterable_solids_percent=100.0)


def at(subject: ContainerSubject, first: float | None, full: float | None) -> ContainerSubject:
    return replace(subject, days_since_first_entry=first, days_since_full=full)


def test_kept_findings_are_those_of_a_full_evaluation_at_every_moment(packs):
    subjects = list(grid())
    assert len(subjects) > 200
    clock_fired = 0
    for subject in subjects:
        for first, full in ((None, None), (0.5, None), (2.0, 2.99), (365.0, 3.0), (400.0, 30.0)):
            timed = at(subject, first, full)
            reference = evaluate(packs, "waste_container", timed, keep=False)
            assert evaluate(packs, "waste_container", timed) == reference  # the first read keeps them
            assert evaluate(packs, "waste_container", timed) == reference  # a later read uses what was kept
            clock_fired += any(MEASURES[f.measure.partition(":")[0]].clock for f in reference)
    assert clock_fired > 0  # the clock rules did fire on the way, so they were judged


def test_only_clock_measures_read_the_clock_fields(packs):
    """Every container measure of a loaded rule not registered with clock=True answers the same with the clock
    fields blanked; each one registered with clock=True answers differently for some subject."""
    measured = {(a.definition.name, a.argument): a.definition for a in packs.rules_for("waste_container")}
    reads_clock = set()
    for subject in grid():
        for first, full in itertools.chain(((d, None) for d in DAYS), ((None, d) for d in DAYS)):
            timed = at(subject, first, full)
            for (name, argument), definition in measured.items():
                if definition.compute(timed, argument) != definition.compute(at(timed, None, None), argument):
                    reads_clock.add(name)
    assert len(measured) > 10
    assert {name for (name, _), m in measured.items() if m.clock} == reads_clock == {
        "days_since_first_entry", "days_since_full"}


def test_a_changed_record_is_judged_again(packs):
    below = ContainerSubject("W-9", "solvent with heavy metals", "liquid", 20.0, 0.0, 25.0,
                             element_mass_ug={"Cd": 19_999}, components=(ACETONE,))
    above = replace(below, element_mass_ug={"Cd": 20_000})  # 1.0 mg/L in 20 L: D006 (40 CFR 261.24 Table 1)
    codes = [{f.suggested_code.code for f in evaluate(packs, "waste_container", s) if f.suggested_code}
             for s in (below, above, below)]
    assert "D006" not in codes[0] and "D006" in codes[1] and codes[2] == codes[0]


def test_other_rules_are_judged_afresh(packs):
    """Rule packs loaded again are another object: nothing kept for the first applies to the second."""
    subject = at(next(grid()), 400.0, None)
    first = evaluate(packs, "waste_container", subject)
    again = load_packs(RULES, ["us-federal", "eu"])
    assert evaluate(again, "waste_container", subject) == evaluate(again, "waste_container", subject, keep=False)
    assert first == evaluate(packs, "waste_container", subject, keep=False)


def test_what_is_kept_is_bounded(packs, monkeypatch):
    monkeypatch.setattr(evaluation, "_KEPT_SIZE", 8)
    for subject in itertools.islice(grid(), 40):
        subject = replace(subject, label="bounded")  # facts not kept before
        assert evaluate(packs, "waste_container", subject) == evaluate(packs, "waste_container", subject, keep=False)
        assert len(evaluation._KEPT) <= 8
