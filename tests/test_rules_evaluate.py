"""Evaluating rules: exact threshold boundaries, temperature rules, findings and their order.

Physical values and their sources: 1-octadecene closed-cup flash point ≈149 °C (supplier
safety data sheets, from memory); toluene 4 °C (Prudent Practices in the Laboratory, seen);
trioctylphosphine air-sensitive (supplier safety data sheets, from memory). Unit relations: SI prefixes (SI Brochure, 9th ed.), 0 °C = 273.15 K.
"""

from __future__ import annotations

from decimal import Decimal

import pytest
import yaml

from service.chem.units import parse_quantity, to_decimal
from service.rules.evaluate import evaluate, highest_level
from service.rules.loader import load_packs
from service.rules.measures import MEASURES, Measure, MeasureResult
from service.rules.subjects import ProcedureSubject, ReagentFacts, StepFacts

DISCLAIMER = "Suggestions only; local regulations and the site safety officer decide."


def rule(rule_id, measure, comparator, threshold, level="review", message="{value} vs {threshold}: {detail}", **extra):
    return {
        "id": rule_id, "scope": "procedure", "measure": measure, "comparator": comparator, "threshold": threshold,
        "level": level, "message": message, "source": "site policy", **extra,
    }  # fmt: skip


def layered(tmp_path, *packs):
    """Write each (name, rules) pack into tmp_path and load them in order."""
    for name, rules in packs:
        document = {"pack": name, "version": "2026.12", "jurisdiction": "test", "disclaimer": DISCLAIMER}
        document["rules"] = rules
        (tmp_path / f"{name}.yaml").write_text(yaml.safe_dump(document, allow_unicode=True), encoding="utf-8")
    return load_packs(tmp_path, [name for name, _ in packs])


def ug(text: str) -> int:
    """Micrograms in an amount text ("250 mg" -> 250000), as the store computes draws."""
    return int(to_decimal(parse_quantity(text, expect="mass"), "ug"))


def cd_draws(*amounts: str) -> ProcedureSubject:
    draws = [ReagentFacts(f"cadmium draw {i}", text, "solution", {"Cd": ug(text)}) for i, text in enumerate(amounts)]
    return ProcedureSubject("cd", tuple(draws), ())


@pytest.mark.parametrize(
    "comparator, threshold, amounts, fires",
    [
        (">=", "0.5 g", ["250 mg", "250 mg"], True),  # exactly at the threshold
        (">=", "0.5 g", ["250 mg", "249.999 mg"], False),  # 1 µg below
        (">=", "0.5 g", ["250 mg", "250.001 mg"], True),  # 1 µg above
        (">", "0.5 g", ["250 mg", "250 mg"], False),
        (">", "0.5 g", ["500.001 mg"], True),
        ("<", "500000 ug", ["499.999 mg"], True),
        ("<=", "0.5 g", ["500.001 mg"], False),
        ("==", "1.1 mg", ["1.1 mg"], True),  # 1.1 mg in float µg is 1100.0000000000002
        ("!=", "1.1 mg", ["1100 ug"], False),
        (">", "0 mg", [], False),
    ],
)
def test_element_mass_boundaries_are_exact(tmp_path, comparator, threshold, amounts, fires):
    rules = layered(tmp_path, ("site", [rule("site.cd", "element_mass:Cd", comparator, threshold)]))
    assert bool(evaluate(rules, "procedure", cd_draws(*amounts))) is fires


def test_a_finding_carries_everything(tmp_path):
    code = {"system": "RCRA", "code": "D006", "description": "toxicity characteristic, cadmium"}
    rules = layered(tmp_path, ("site", [rule("site.cd", "element_mass:Cd", ">=", "0.5 g", suggested_code=code)]))
    [finding] = evaluate(rules, "procedure", cd_draws("250 mg", "262.5 mg"))
    assert (finding.rule_id, finding.pack, finding.pack_version) == ("site.cd", "site", "2026.12")
    assert (finding.level, finding.measure, finding.comparator) == ("review", "element_mass:Cd", ">=")
    assert (finding.value, finding.unit) == (512_500, "ug")
    assert (finding.threshold_text, finding.threshold_value) == ("0.5 g", Decimal(500_000))
    assert finding.message == "0.5125 g vs 0.5 g: cadmium draw 1 262.5 mg, cadmium draw 0 250 mg"
    assert (finding.suggested_code.system, finding.suggested_code.code) == ("RCRA", "D006")
    assert (finding.source, finding.disclaimer) == ("site policy", DISCLAIMER)


ODE = ReagentFacts("1-octadecene", "10 mL", "liquid", flash_point_c=149.0, flammable=True)


def heated(flash_point_c: float, temperature_c: float = 300.0) -> ProcedureSubject:
    liquid = ReagentFacts("solvent", "10 mL", "liquid", flash_point_c=flash_point_c, flammable=True)
    return ProcedureSubject("heat", (liquid,), (StepFacts(0, "heat", temperature_c, "argon"),))  # the first step


@pytest.mark.parametrize(
    "threshold, flash_point_c, fired, threshold_delta_c",
    [
        ("0 delta_degC", 149.0, [151], 0),  # 1-octadecene under a 300 °C step fires
        ("0 K", 149.0, [151], 0),
        ("0 delta_degC", 310.0, [], 0),  # flash point above the step: no finding
        ("0 delta_degC", 300.0, [0], 0),  # exactly at the flash point
        ("-20 delta_degC", 310.0, [-10], -20),  # a margin rule: within 20 °C below the flash point
        ("-9 delta_degC", 310.0, [], -9),
        ("270 delta_degF", 149.0, [151], 150),  # a 270 °F difference is 150 K
        ("272 delta_degF", 149.0, [], Decimal("151.11111111111111111")),
    ],
)
def test_temperature_above_flash_point(tmp_path, threshold, flash_point_c, fired, threshold_delta_c):
    rules = layered(tmp_path, ("site", [rule("site.fp", "max_temperature_minus_flash_point", ">=", threshold)]))
    assert rules.rules[0].threshold_value == threshold_delta_c
    findings = evaluate(rules, "procedure", heated(flash_point_c))
    assert [f.value for f in findings] == fired
    assert all(f.unit == "delta_degC" for f in findings)


def test_temperature_message_shows_a_difference_not_an_absolute_temperature(tmp_path):
    rules = layered(tmp_path, ("site", [rule("site.fp", "max_temperature_minus_flash_point", ">=", "0 delta_degC")]))
    [finding] = evaluate(rules, "procedure", heated(149.0))
    assert finding.message == "151 °C vs 0 °C: step 1 (heat) at 300 °C; solvent flash point 149 °C"
    assert (finding.value_text, finding.comparator, finding.threshold_shown) == ("151 °C", ">=", "0 °C")


# Display fields: the value in the threshold's unit and the threshold with a readable symbol.
# Unit relations: 1 % = 0.01 (ISO 80000-1), 1 mg = 1000 µg and 1 K = 1 °C as a difference (SI Brochure, 9th ed.).
@pytest.mark.parametrize(
    "scale, last_approved, threshold, value_text, threshold_shown",
    [
        (0.93, 1.0, "90 %", "93.0 %", "90 %"),  # a fraction measure against a percentage threshold, one decimal
        (2.0, 3.0, "50 %", "66.7 %", "50 %"),  # 2/3: percentages to one decimal
        (0.90004, 1.0, "90 %", "90.004 %", "90 %"),  # one decimal would read "90 % > 90 %": more places
        (2.0, 1.0, "1.5", "2", "1.5"),  # a plain number stays plain
    ],
)
def test_fraction_shown_as_percent_of_the_threshold(tmp_path, scale, last_approved, threshold, value_text, threshold_shown):
    rules = layered(tmp_path, ("site", [rule("site.scale", "scale_factor_over_last_approved", ">", threshold)]))
    subject = ProcedureSubject("p", (), (), scale, last_approved)
    [finding] = evaluate(rules, "procedure", subject)
    assert (finding.value_text, finding.threshold_shown) == (value_text, threshold_shown)
    assert finding.message.startswith(f"{value_text} vs {threshold_shown}")


@pytest.mark.parametrize(
    "threshold, value_text, threshold_shown",
    [
        ("0 delta_degC", "151 °C", "0 °C"),
        ("-20 delta_degC", "151 °C", "-20 °C"),
        ("0 K", "151 K", "0 K"),  # a kelvin difference stays in kelvin
        ("270 delta_degF", "271.8 °F", "270 °F"),  # 151 K x 9/5
    ],
)
def test_temperature_difference_never_reads_delta(tmp_path, threshold, value_text, threshold_shown):
    rules = layered(tmp_path, ("site", [rule("site.fp", "max_temperature_minus_flash_point", ">=", threshold)]))
    [finding] = evaluate(rules, "procedure", heated(149.0))
    assert (finding.value_text, finding.threshold_shown) == (value_text, threshold_shown)
    assert "delta" not in finding.message


@pytest.mark.parametrize(
    "amounts, threshold, value_text, threshold_shown",
    [
        (["250 mg", "262.5 mg"], "100 mg", "512.5 mg", "100 mg"),  # µg measure, mg threshold
        (["0.002 mg"], "0.001 mg", "0.002 mg", "0.001 mg"),  # 2 µg: no rounding to whole mg
        (["1.25 g"], "1 g", "1.25 g", "1 g"),
    ],
)
def test_micrograms_shown_in_the_threshold_unit(tmp_path, amounts, threshold, value_text, threshold_shown):
    rules = layered(tmp_path, ("site", [rule("site.cd", "element_mass:Cd", ">=", threshold)]))
    [finding] = evaluate(rules, "procedure", cd_draws(*amounts))
    assert finding.unit == "ug"
    assert (finding.value_text, finding.threshold_shown) == (value_text, threshold_shown)


@pytest.mark.parametrize("threshold", ["250 degC", "250 °C", "523.15 K", "482 degF"])
def test_injection_temperature_in_any_temperature_unit(tmp_path, threshold):
    rules = layered(tmp_path, ("site", [rule("site.inj", "max_injection_temperature", ">=", threshold)]))
    at = ProcedureSubject("inj", (), (StepFacts(1, "inject", 250.0, "argon"),))
    below = ProcedureSubject("inj", (), (StepFacts(1, "inject", 249.9, "argon"),))
    assert [f.value for f in evaluate(rules, "procedure", at)] == [250]
    assert evaluate(rules, "procedure", below) == []


PROCEDURE_RULES = [
    rule("site.unknown-fp", "flammable_liquids_with_unknown_flash_point", ">", "0", "caution"),
    rule("site.air", "air_sensitive_without_inert_step", ">", "0", "block"),
    rule("site.hse", "chalcogen_with_acid", ">", "0", "review"),
    rule("site.scale", "scale_factor_over_last_approved", ">=", "0", "review"),
    rule("site.cd-note", "element_mass:Cd", ">", "0 mg", "note"),
]
TOP = ReagentFacts("trioctylphosphine", "2 mL", "liquid", flags=frozenset({"air_sensitive"}), flash_point_c=146.0)
SE = ReagentFacts("selenium", "79 mg", "solid", {"Se": 79_000})
ACID = ReagentFacts("hydrochloric acid", "1 mL", "solution", flags=frozenset({"acid"}))
UNKNOWN = ReagentFacts("new solvent", "5 mL", "liquid", flammable=True)
CDO = ReagentFacts("cadmium oxide", "128 mg", "solid", {"Cd": 112_000})


@pytest.mark.parametrize(
    "reagents, atmosphere, last_approved, fired",
    [
        ([TOP, ODE], "air", None, ["site.air"]),
        ([TOP, ODE], "argon", None, []),
        ([SE, ACID], "argon", None, ["site.hse"]),
        ([UNKNOWN], "argon", None, ["site.unknown-fp"]),
        ([ODE], "argon", 1.0, ["site.scale"]),
        (
            [CDO, SE, ACID, TOP, UNKNOWN],
            "air",
            1.0,
            ["site.air", "site.hse", "site.scale", "site.unknown-fp", "site.cd-note"],  # block, review, caution, note
        ),
    ],
)
def test_procedure_rules_fire_and_sort(tmp_path, reagents, atmosphere, last_approved, fired):
    rules = layered(tmp_path, ("site", PROCEDURE_RULES))
    subj = ProcedureSubject("p", tuple(reagents), (StepFacts(1, "heat", 100.0, atmosphere),), 1.0, last_approved)
    findings = evaluate(rules, "procedure", subj)
    assert [f.rule_id for f in findings] == fired
    assert all(f.disclaimer == DISCLAIMER for f in findings)


def test_scale_rule_skipped_when_never_approved(tmp_path):
    rules = layered(tmp_path, ("site", [rule("site.scale", "scale_factor_over_last_approved", ">=", "0")]))
    assert evaluate(rules, "procedure", ProcedureSubject("p", (), (), 100.0, None)) == []


def test_same_level_sorts_by_rule_id_and_override_is_reported(tmp_path):
    base = [rule("b.cd", "element_mass:Cd", ">", "0 mg", "note"), rule("a.cd", "element_mass:Cd", ">", "0 mg", "note")]
    site = [rule("b.cd", "element_mass:Cd", ">", "10 mg", "block", message="site: {value}")]
    rules = layered(tmp_path, ("base", base), ("site", site))
    findings = evaluate(rules, "procedure", cd_draws("112 mg"))
    assert [(f.rule_id, f.level, f.pack, f.message) for f in findings] == [
        ("b.cd", "block", "site", "site: 112 mg"),
        ("a.cd", "note", "base", "112 mg vs 0 mg: cadmium draw 0 112 mg"),
    ]


def test_each_measure_is_computed_once_per_call(tmp_path, monkeypatch):
    calls = []

    def counted(subject, argument):
        """A test measure that counts its calls."""
        calls.append(argument)
        return MeasureResult(3, "", "")

    monkeypatch.setitem(MEASURES, "counted", Measure("counted", "procedure", "", "test", counted))
    rules = layered(tmp_path, ("site", [rule(f"site.c{i}", "counted", ">", str(i)) for i in range(4)]))
    findings = evaluate(rules, "procedure", ProcedureSubject("p", (), ()))
    assert ([f.rule_id for f in findings], calls) == (["site.c0", "site.c1", "site.c2"], [None])
    evaluate(rules, "procedure", ProcedureSubject("p", (), ()))
    assert len(calls) == 2


def test_other_scopes_have_no_rules_yet_and_unknown_scope_fails(tmp_path):
    rules = layered(tmp_path, ("site", PROCEDURE_RULES))
    assert evaluate(rules, "waste_container", object()) == []
    with pytest.raises(ValueError, match="unknown scope"):
        evaluate(rules, "container", object())


@pytest.mark.parametrize(
    "levels, highest",
    [([], None), (["note"], "note"), (["note", "caution"], "caution"), (["review", "block", "note"], "block")],
)
def test_highest_level(tmp_path, levels, highest):
    pack = [rule(f"site.r{i}", "element_mass:Cd", ">", "0 mg", level) for i, level in enumerate(levels)]
    rules = layered(tmp_path, ("site", pack))
    assert highest_level(evaluate(rules, "procedure", cd_draws("1 mg"))) == highest
