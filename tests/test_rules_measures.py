"""The measure registry and the procedure measures.

Physical values and their sources: toluene flash point 4 °C and n-hexane −22 °C
(Prudent Practices in the Laboratory, seen); chloroform has no flash point (NAS 2016, seen);
1-octadecene ≈149 °C and trioctylphosphine ≈146 °C, air-sensitive (supplier safety data sheets,
from memory).
"""

from __future__ import annotations

import dataclasses

import pytest

from service.rules.measures import MEASURES, MeasureNameError, resolve_measure, vocabulary
from service.rules.subjects import ProcedureSubject, ReagentFacts, StepFacts

ODE = ReagentFacts("1-octadecene", "10 mL", "liquid", flash_point_c=149.0, flammable=True)
TOLUENE = ReagentFacts("toluene", "5 mL", "liquid", flash_point_c=4.0, flammable=True)
HEXANE = ReagentFacts("n-hexane", "20 mL", "liquid", flash_point_c=-22.0, flammable=True)
CHLOROFORM = ReagentFacts("chloroform", "5 mL", "liquid", flash_point_c=None, flammable=False)
TOP = ReagentFacts("trioctylphosphine", "2 mL", "liquid", flags=frozenset({"air_sensitive"}), flash_point_c=146.0)
CDO = ReagentFacts("cadmium oxide", "128 mg", "solid", {"Cd": 112_000, "O": 16_000}, frozenset({"acutely_toxic"}), "1B")


def subject(reagents=(), steps=(), scale=1.0, last_approved_scale=None) -> ProcedureSubject:
    return ProcedureSubject("test", tuple(reagents), tuple(steps), scale, last_approved_scale)


def compute(name, subj):
    found, argument = resolve_measure(name)
    return found.compute(subj, argument)


def test_vocabulary_lists_every_procedure_measure():
    table = {row["name"]: row["unit"] for row in vocabulary() if row["scope"] == "procedure"}
    assert table == {
        "element_mass:<El>": "ug",
        "max_temperature_minus_flash_point": "delta_degC",
        "flammable_liquids_with_unknown_flash_point": "",
        "air_sensitive_without_inert_step": "",
        "carcinogen_1a_1b_count": "",
        "chalcogen_with_acid": "",
        "toxic_metal_powders": "",
        "scale_factor_over_last_approved": "",
        "max_injection_temperature": "degC",
    }
    assert all(row["description"] and row["scope"] in ("procedure", "waste_container", "accumulation_area",
                                                       "generator_month") for row in vocabulary())
    assert set(MEASURES) == {row["name"].split(":")[0] for row in vocabulary()}


@pytest.mark.parametrize(
    "name, phrase",
    [
        ("volume", "unknown measure 'volume'"),
        ("element_mass", "needs an argument"),
        ("element_mass:", "needs an argument"),
        ("element_mass:Xx", "not an element symbol"),
        ("element_mass:n", "not an element symbol"),  # periodictable's neutron is not an element
        ("element_mass:CD", "not an element symbol"),
        ("toxic_metal_powders:Cd", "takes no"),
    ],
)
def test_bad_measure_names(name, phrase):
    with pytest.raises(MeasureNameError, match=phrase):
        resolve_measure(name)


def test_element_mass_sums_draws_and_names_top_contributors():
    draws = [ReagentFacts(f"r{i}", "1 g", "solid", {"Cd": mass}) for i, mass in enumerate([5, 250_000, 1_500, 30_000])]
    result = compute("element_mass:Cd", subject(draws + [ODE]))
    assert (result.value, result.unit) == (281_505, "ug")
    assert result.detail == "r1 250 mg, r3 30 mg, r2 1.5 mg, 1 more"
    assert compute("element_mass:Se", subject(draws)).value == 0


@pytest.mark.parametrize(
    "reagents, steps, value",
    [
        ([ODE], [StepFacts(1, "heat", 300.0)], 151),  # 300 °C − 149 °C
        ([ODE, TOLUENE], [StepFacts(1, "heat", 300.0), StepFacts(2, "cool", 25.0)], 296),  # lowest flash point
        ([ODE], [StepFacts(1, "heat", 120.5), StepFacts(2, "hold", 100.0)], -28.5),  # highest step
        ([HEXANE], [StepFacts(1, "mix", 20.0)], 42),
        # decimal, not binary, subtraction: 151.2, not 151.20000000000002
        ([ReagentFacts("l", "1 mL", "liquid", flash_point_c=149.1)], [StepFacts(1, "heat", 300.3)], 151.2),
    ],
)
def test_temperature_minus_flash_point(reagents, steps, value):
    result = compute("max_temperature_minus_flash_point", subject(reagents, steps))
    assert (result.value, result.unit) == (value, "delta_degC")


def test_temperature_minus_flash_point_names_liquid_and_step():
    # stored positions are 0-based; the detail counts steps from 1 as the pages do
    result = compute("max_temperature_minus_flash_point", subject([ODE, CDO], [StepFacts(2, "heat", 300.0)]))
    assert result.detail == "step 3 (heat) at 300 °C; 1-octadecene flash point 149 °C"


@pytest.mark.parametrize(
    "reagents, steps",
    [
        ([ODE], [StepFacts(1, "mix")]),  # no step temperature
        ([CHLOROFORM], [StepFacts(1, "heat", 60.0)]),  # no liquid with a flash point
        ([ReagentFacts("wax", "1 g", "solid", flash_point_c=200.0)], [StepFacts(1, "heat", 300.0)]),  # not a liquid
        ([ODE], []),
    ],
)
def test_temperature_minus_flash_point_not_applicable(reagents, steps):
    assert compute("max_temperature_minus_flash_point", subject(reagents, steps)) is None


# A CdSe core synthesis as planned (positions 0-based): 1-octadecene from the start, TOP-Se injected at step
# 2, acetone at the precipitation (step 4), hexane to redisperse after centrifuging (step 6).
# Acetone −20 °C (NAS 2016, App. D, seen), n-hexane −22 °C, 1-octadecene ≈149 °C (from memory).
ACETONE = ReagentFacts("acetone", "40 mL", "liquid", flash_point_c=-20.0, flammable=True)
CORE_STEPS = [StepFacts(0, "degas", 120.0, "vacuum"), StepFacts(1, "heat", 300.0, "argon"),
              StepFacts(2, "inject", 270.0, "argon"), StepFacts(3, "cool", None, "argon"),
              StepFacts(4, "precipitate"), StepFacts(5, "centrifuge"), StepFacts(6, "mix", 20.0)]


def at_step(reagent: ReagentFacts, step: int) -> ReagentFacts:
    return dataclasses.replace(reagent, step=step)


def test_solvents_added_after_the_heated_steps_do_not_count():
    reagents = [ODE, at_step(TOP, 2), at_step(ACETONE, 4), at_step(HEXANE, 6)]
    result = compute("max_temperature_minus_flash_point", subject(reagents, CORE_STEPS))
    # the flask at 300 °C holds 1-octadecene (149 °C) only: 151 degrees, not 300 − (−20) = 320 for acetone
    assert result.value == 151 and result.detail == "step 2 (heat) at 300 °C; 1-octadecene flash point 149 °C"


def test_a_draw_without_a_step_is_in_the_vessel_from_the_start():
    # the same acetone with no step: in the flask from the start, so 300 − (−20) = 320
    result = compute("max_temperature_minus_flash_point", subject([ODE, ACETONE], CORE_STEPS))
    assert result.value == 320 and "acetone" in result.detail


@pytest.mark.parametrize(
    "step, value, where",
    [
        (1, 322, "step 2 (heat) at 300 °C"),  # hexane added at the heat step counts there: 300 − (−22)
        (2, 292, "step 3 (inject) at 270 °C"),  # added at the injection: counts from that step on, 270 − (−22)
        (3, 42, "step 7 (mix) at 20 °C"),  # added after the hot steps: only the 20 °C step sees it, 20 − (−22)
    ],
)
def test_each_step_is_judged_over_what_is_in_the_vessel_then(step, value, where):
    reagents = [ReagentFacts("wax", "1 g", "solid", flash_point_c=200.0), at_step(HEXANE, step)]
    result = compute("max_temperature_minus_flash_point", subject(reagents, CORE_STEPS))
    assert result.value == value and result.detail.startswith(where)


def test_no_liquid_in_the_vessel_at_a_step_with_a_temperature():
    # acetone added at the precipitation (no temperature), nothing else liquid: not applicable
    steps = CORE_STEPS[:6]
    assert compute("max_temperature_minus_flash_point", subject([CDO, at_step(ACETONE, 4)], steps)) is None


def test_unknown_flash_point_of_a_flammable_liquid_is_counted():
    unknown = ReagentFacts("new solvent", "5 mL", "solution", flammable=True)
    result = compute("flammable_liquids_with_unknown_flash_point", subject([unknown, HEXANE, CHLOROFORM, ODE]))
    assert (result.value, result.detail) == (1, "new solvent")


@pytest.mark.parametrize(
    "reagents, atmospheres, value",
    [
        ([TOP, ODE], ["air", None], 1),
        ([TOP, ODE], [], 1),
        ([TOP, ReagentFacts("diethylzinc", "1 mL", "liquid", flags=frozenset({"pyrophoric"}))], ["air"], 2),
        ([TOP], ["air", "argon"], 0),
        ([TOP], ["Nitrogen "], 0),
        ([TOP], ["glovebox"], 0),
        ([ODE], ["air"], 0),
    ],
)
def test_air_sensitive_without_inert_step(reagents, atmospheres, value):
    steps = [StepFacts(i, "heat", 100.0, atmosphere) for i, atmosphere in enumerate(atmospheres, 1)]
    assert compute("air_sensitive_without_inert_step", subject(reagents, steps)).value == value


def test_carcinogens_1a_1b_are_counted_not_2():
    cat2 = ReagentFacts("suspected", "1 g", "solid", carcinogen_category="2")
    cat1a = ReagentFacts("known", "1 g", "solid", carcinogen_category="1A")
    result = compute("carcinogen_1a_1b_count", subject([CDO, cat2, cat1a]))
    assert (result.value, result.detail) == (2, "cadmium oxide, known")


SE = ReagentFacts("selenium", "79 mg", "solid", {"Se": 79_000})
TE = ReagentFacts("tellurium", "128 mg", "solid", {"Te": 128_000})
OLEIC = ReagentFacts("oleic acid", "3 mL", "liquid", flags=frozenset({"acid"}), flash_point_c=189.0)
HCL = ReagentFacts("hydrochloric acid", "1 mL", "solution", flags=frozenset({"acid"}))


@pytest.mark.parametrize(
    "reagents, value",
    [
        ([SE, HCL], 1),
        ([TE, OLEIC], 1),
        ([SE], 0),
        ([HCL, CDO], 0),
        ([ReagentFacts("no selenium", "1 g", "solid", {"Se": 0}), HCL], 0),
    ],
)
def test_chalcogen_with_acid(reagents, value):
    assert compute("chalcogen_with_acid", subject(reagents)).value == value


def test_toxic_metal_powders_are_solids_only():
    solution = ReagentFacts("cadmium oleate", "2 mL", "solution", {"Cd": 22_000}, frozenset({"acutely_toxic"}))
    other = ReagentFacts("sodium azide", "1 g", "solid", {"N": 646_000}, frozenset({"acutely_toxic"}))
    result = compute("toxic_metal_powders", subject([CDO, solution, other, SE]))
    assert (result.value, result.detail) == (1, "cadmium oxide")


@pytest.mark.parametrize("scale, last, value", [(3.0, 1.5, 2), (1.0, 1.0, 1), (0.5, 2.0, 0.25), (0.3, 0.1, 3)])
def test_scale_factor(scale, last, value):
    assert compute("scale_factor_over_last_approved", subject(scale=scale, last_approved_scale=last)).value == value


def test_scale_factor_not_applicable_when_never_approved():
    assert compute("scale_factor_over_last_approved", subject(scale=50.0)) is None


@pytest.mark.parametrize(
    "steps, value",
    [
        ([StepFacts(1, "heat", 320.0), StepFacts(2, "inject", 300.0), StepFacts(3, "inject", 270.0)], 300),
        ([StepFacts(1, "Inject", 95.5)], 95.5),
        ([StepFacts(1, "heat", 300.0), StepFacts(2, "inject")], None),
        ([], None),
    ],
)
def test_max_injection_temperature(steps, value):
    result = compute("max_injection_temperature", subject(steps=steps))
    assert (result.value if result else None) == value
    if result:
        assert result.unit == "degC"
