"""Run mass balance, checked against hand calculations.

Atomic weights: CIAAW 2021 standard atomic weights (Prohaska et al., Pure Appl. Chem. 94,
2022; the Atomic weights table, seen): Cd 112.414, Se 78.971, O 15.999. The worked run:
0.2 mmol CdO and 0.4 mmol Se (as TOP-Se) in 1-octadecene; the outputs are example numbers
chosen to sum exactly to the inputs. Every expected value below is worked out by hand in the
test, not taken from the code.
"""

from __future__ import annotations

from decimal import ROUND_HALF_EVEN, Decimal

import pytest

from service.balance import BalanceError, DuplicateByDifferenceError, Flow, run_balance

CD_G_PER_MOL, SE_G_PER_MOL, O_G_PER_MOL = Decimal("112.414"), Decimal("78.971"), Decimal("15.999")
FIVE_PERCENT = Decimal("0.05")


def ug_from_mmol(mmol: str, g_per_mol: Decimal) -> int:
    """mmol × g/mol = mg; × 1000 = µg, rounded once, half to even (DEVELOPERS.md)."""
    return int((Decimal(mmol) * g_per_mol * 1000).quantize(Decimal(1), rounding=ROUND_HALF_EVEN))


CD_UG = ug_from_mmol("0.2", CD_G_PER_MOL)  # 0.2 × 112.414 = 22.4828 mg
SE_UG = ug_from_mmol("0.4", SE_G_PER_MOL)  # 0.4 × 78.971 = 31.5884 mg


def test_hand_values_of_the_worked_run():
    assert Decimal("0.2") * (CD_G_PER_MOL + O_G_PER_MOL) == Decimal("25.6826")  # mg CdO weighed
    assert (CD_UG, SE_UG) == (22_483, 31_588)


INPUTS = [
    Flow("CdO 25.6826 mg", "input", {"Cd": CD_UG}),
    Flow("TOP-Se 0.4 mmol", "input", {"Se": SE_UG}),
    Flow("1-octadecene 10 mL", "input", {}),
]
PRODUCT = Flow("CdSe dots (ICP assay)", "product", {"Cd": 15_000, "Se": 12_000}, method="measured")
OUTPUTS = [
    Flow("supernatant 1", "waste", {"Cd": 4_200, "Se": 14_000}),
    Flow("supernatant 2", "waste", {"Cd": 2_283, "Se": 5_000}),
    Flow("solids: tips, wipes", "waste", {"Cd": 1_000, "Se": 588}),
]
assert 15_000 + 4_200 + 2_283 + 1_000 == CD_UG and 12_000 + 14_000 + 5_000 + 588 == SE_UG


def test_worked_run_closes_exactly():
    balance = run_balance(INPUTS + [PRODUCT] + OUTPUTS, tolerance_fraction=FIVE_PERCENT)
    assert balance.closes
    cd = balance.element("Cd")
    assert (cd.input_ug, cd.product_ug, cd.waste_ug, cd.unaccounted_ug) == (22_483, 15_000, 7_483, 0)
    assert [w.ug for w in cd.waste] == [4_200, 2_283, 1_000]
    assert [w.label for w in cd.waste] == ["supernatant 1", "supernatant 2", "solids: tips, wipes"]
    assert cd.closure_percent == Decimal("100.00") and cd.hints == ()
    assert [row.element for row in balance.elements] == ["Cd", "Se"]


# Removing one entry leaves exactly its mass unaccounted. Tolerance 5 %: Cd 22 483 × 0.05 =
# 1124.15 µg, Se 31 588 × 0.05 = 1579.4 µg. Closure = 100 × (input − missing) / input, by hand.
@pytest.mark.parametrize(
    "removed, cd_missing, se_missing, cd_closes, se_closes, cd_closure",
    [
        ("supernatant 1", 4_200, 14_000, False, False, "81.32"),  # 18283 / 22483 = 0.813192…
        ("supernatant 2", 2_283, 5_000, False, False, "89.85"),  # 20200 / 22483 = 0.898456…
        ("solids: tips, wipes", 1_000, 588, True, True, "95.55"),  # 21483 / 22483 = 0.955522…
    ],
)
def test_missing_entry_is_reported(removed, cd_missing, se_missing, cd_closes, se_closes, cd_closure):
    flows = INPUTS + [PRODUCT] + [f for f in OUTPUTS if f.label != removed]
    balance = run_balance(flows, tolerance_fraction=FIVE_PERCENT)
    cd, se = balance.element("Cd"), balance.element("Se")
    assert (cd.unaccounted_ug, se.unaccounted_ug) == (cd_missing, se_missing)
    assert (cd.closes, se.closes, balance.closes) == (cd_closes, se_closes, cd_closes and se_closes)
    assert cd.closure_percent == Decimal(cd_closure)
    assert bool(cd.hints) == (not cd_closes)
    if not cd_closes:
        assert any("supernatant or wash" in hint for hint in cd.hints)
        assert any("glassware" in hint for hint in cd.hints)


# Boundary: 20 000 µg × 0.05 = 1000 µg exactly; 22 483 µg × 0.05 = 1124.15 µg.
@pytest.mark.parametrize(
    "input_ug, product_ug, closes",
    [
        (20_000, 19_000, True),  # 1000 µg missing: exactly at the tolerance
        (20_000, 18_999, False),  # 1001 µg: 1 µg over
        (20_000, 21_000, True),  # 1000 µg surplus
        (20_000, 21_001, False),
        (22_483, 21_359, True),  # 1124 µg ≤ 1124.15
        (22_483, 21_358, False),  # 1125 µg > 1124.15
    ],
)
def test_tolerance_boundary(input_ug, product_ug, closes):
    flows = [Flow("Cd draw", "input", {"Cd": input_ug}), Flow("dots", "product", {"Cd": product_ug})]
    row = run_balance(flows, tolerance_fraction=FIVE_PERCENT).element("Cd")
    assert row.closes is closes
    assert abs(row.unaccounted_ug) == abs(input_ug - product_ug)


def test_zero_tolerance_closes_only_exactly():
    flows = [Flow("Cd draw", "input", {"Cd": 100}), Flow("dots", "product", {"Cd": 99})]
    assert not run_balance(flows, tolerance_fraction=Decimal(0)).closes


def test_by_difference_product_takes_the_remainder_and_says_so():
    product = Flow("CdSe dots", "product", {"Cd": 0, "Se": 0}, method="by_difference")
    balance = run_balance(INPUTS + [product] + OUTPUTS[:2], tolerance_fraction=FIVE_PERCENT)
    cd, se = balance.element("Cd"), balance.element("Se")
    assert (cd.product_ug, se.product_ug) == (22_483 - 4_200 - 2_283, 31_588 - 14_000 - 5_000)
    assert (cd.unaccounted_ug, cd.by_difference, cd.closes) == (0, True, True)
    assert any("closes by construction" in note for note in cd.notes)
    # what a further waste entry may still take: the remainder the by-difference product holds
    assert (cd.remaining_ug, se.remaining_ug) == (22_483 - 4_200 - 2_283, 31_588 - 14_000 - 5_000)


def test_by_difference_cannot_go_negative():
    flows = [
        Flow("Cd draw", "input", {"Cd": 1_000}),
        Flow("dots", "product", {"Cd": 0}, method="by_difference"),
        Flow("wash", "waste", {"Cd": 1_200}),
    ]
    row = run_balance(flows, tolerance_fraction=FIVE_PERCENT).element("Cd")
    assert (row.product_ug, row.unaccounted_ug, row.closes) == (0, -200, False)
    assert row.remaining_ug == -200  # nothing left for another entry
    assert any("set to 0" in note for note in row.notes)


def test_second_by_difference_product_is_refused():
    flows = INPUTS + [
        Flow("dots A", "product", {"Cd": 0}, method="by_difference"),
        Flow("dots B", "product", {"Cd": 0}, method="by_difference"),
    ]
    with pytest.raises(DuplicateByDifferenceError, match="'dots A', 'dots B'") as caught:
        run_balance(flows, tolerance_fraction=FIVE_PERCENT)
    assert isinstance(caught.value, ValueError)


def test_double_counted_entry_gives_negative_unaccounted_and_hint():
    flows = INPUTS + [PRODUCT] + OUTPUTS + [Flow("supernatant 1 (again)", "waste", {"Cd": 4_200})]
    cd = run_balance(flows, tolerance_fraction=FIVE_PERCENT).element("Cd")
    assert (cd.unaccounted_ug, cd.closes) == (-4_200, False)
    assert cd.closure_percent == Decimal("81.32")
    assert "counted twice" in cd.hints[0]


def test_a_negative_waste_correction_cancels_a_wrong_entry():
    wrong = Flow("supernatant 1 entered as 6200", "waste", {"Cd": 6_200})
    correction = Flow("correction of supernatant 1", "waste", {"Cd": -2_000})  # 6200 − 2000 = 4200
    flows = INPUTS + [PRODUCT] + [wrong, correction] + OUTPUTS[1:]
    cd = run_balance(flows, tolerance_fraction=FIVE_PERCENT).element("Cd")
    assert (cd.waste_ug, cd.unaccounted_ug, cd.closes) == (7_483, 0, True)
    assert cd.waste[1].ug == -2_000


def test_element_in_outputs_but_no_input():
    shell = Flow("CdSe/ZnS dots", "product", {"Cd": 15_000, "Se": 12_000, "Zn": 500})
    balance = run_balance(INPUTS + [shell] + OUTPUTS, tolerance_fraction=FIVE_PERCENT)
    zn = balance.element("Zn")
    assert (zn.input_ug, zn.unaccounted_ug, zn.closure_percent, zn.closes) == (0, -500, None, False)
    assert "in no input" in zn.hints[0]
    assert balance.element("Cd").closes and not balance.closes


# Estimated product 13 600 µg ± 10 % → band 1360 µg; tolerance 1124.15 µg (Cd 22 483 µg).
@pytest.mark.parametrize(
    "estimate_ug, missing_ug, band_ug, within",
    [
        (13_600, 1_400, 1_360, False),  # 1400 > 1360
        (13_700, 1_300, 1_370, True),  # 1300 ≤ 1370, yet over the tolerance: does not close
        (15_000, 0, 1_500, False),  # nothing unaccounted
    ],
)
def test_estimated_product_band(estimate_ug, missing_ug, band_ug, within):
    product = Flow("dots (absorbance)", "product", {"Cd": estimate_ug}, method="estimated", relative_uncertainty=0.1)
    cd = run_balance([INPUTS[0], product] + OUTPUTS, tolerance_fraction=FIVE_PERCENT).element("Cd")
    assert (cd.unaccounted_ug, cd.uncertainty_ug, cd.within_uncertainty) == (missing_ug, band_ug, within)
    assert cd.closes is (missing_ug <= 1_124)
    assert any("within the estimate's uncertainty" in n for n in cd.notes) is within


def test_rows_are_plain_with_units_in_keys():
    rows = run_balance(INPUTS + [PRODUCT] + OUTPUTS[:2], tolerance_fraction=FIVE_PERCENT).to_rows()
    cd = rows[0]
    assert cd["element"] == "Cd" and cd["input_ug"] == 22_483 and cd["unaccounted_ug"] == 1_000
    assert cd["closure_percent"] == 95.55 and cd["tolerance_ug"] == 1124.15 and cd["closes"] is True
    assert cd["waste"][0] == {"label": "supernatant 1", "ug": 4_200}
    assert {type(value) for value in cd.values()} <= {str, int, float, bool, list}


@pytest.mark.parametrize(
    "kwargs, phrase",
    [
        ({"kind": "output"}, "kind 'output'"),
        ({"element_mass_ug": {"Cd": -1}}, "must not be negative"),
        ({"kind": "input", "element_mass_ug": {"Cd": -1}}, "must not be negative"),
        ({"element_mass_ug": {"Cd": 1.5}}, "whole number of µg"),
        ({"element_mass_ug": {"cd": 1}}, "not an element symbol"),
        ({"kind": "waste", "method": "measured"}, "only a product has a method"),
        ({"method": "guessed"}, "method 'guessed'"),
        ({"method": "estimated"}, "needs its relative uncertainty"),
        ({"method": "measured", "relative_uncertainty": 0.1}, "only an estimated product"),
        ({"method": "estimated", "relative_uncertainty": -0.1}, "must be a number ≥ 0"),
    ],
)
def test_bad_flows_are_refused(kwargs, phrase):
    arguments = {"label": "x", "kind": "product", "element_mass_ug": {"Cd": 1}, **kwargs}
    with pytest.raises(BalanceError, match=phrase):
        Flow(**arguments)


@pytest.mark.parametrize("tolerance", [0.05, Decimal("-0.01"), Decimal(1), "NaN"])
def test_bad_tolerance_is_refused(tolerance):
    with pytest.raises(BalanceError, match="tolerance_fraction"):
        run_balance(INPUTS, tolerance_fraction=tolerance)
