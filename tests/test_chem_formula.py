"""Formula parsing and mass fractions, checked against an independent library (molmass)
and against values worked by hand from the CIAAW 2021 standard atomic weights."""

from __future__ import annotations

import molmass
import pytest

from service.chem.formula import FormulaError, atomic_weight, parse_formula

# Independent check: molmass (its own parser and atomic-weight table). The two tables
# differ slightly for H and S (CdS 144.479 vs 144.474 g/mol), so compare molar masses within
# 0.01 % (relative) and mass fractions within 0.01 percentage point (absolute).
MOLMASS_TABLE = [
    "CdO",
    "Cd(CH3COO)2(H2O)2",
    "CdCl2",
    "Cd(C18H35O2)2",  # cadmium stearate
    "Cd(C14H27O2)2",  # cadmium myristate
    "Cd(NO3)2(H2O)4",
    "CdSe",
    "CdS",
    "SeO2",
    "Zn(CH3COO)2(H2O)2",
    "ZnO",
    "PbBr2",
    "PbI2",
    "Pb(CH3COO)2(H2O)3",
    "Cs2CO3",
    "In(CH3COO)3",
    "(C8H17)3P",  # trioctylphosphine
    "(C8H17)3PO",
    "C18H36",  # 1-octadecene
    "C18H34O2",  # oleic acid
    "C12H26S",  # 1-dodecanethiol
    "CHCl3",
]


@pytest.mark.parametrize("formula", MOLMASS_TABLE)
def test_molar_mass_agrees_with_molmass(formula):
    ours = parse_formula(formula)
    theirs = molmass.Formula(formula)
    assert ours.molar_mass_g_per_mol == pytest.approx(theirs.mass, rel=1e-4)


@pytest.mark.parametrize("formula", MOLMASS_TABLE)
def test_mass_fractions_agree_with_molmass(formula):
    ours = parse_formula(formula).mass_fractions()
    theirs = {row.symbol: row.fraction for row in molmass.Formula(formula).composition().values()}
    assert set(ours) == set(theirs)
    for symbol, fraction in theirs.items():
        assert ours[symbol] == pytest.approx(fraction, abs=1e-4), symbol


# Worked from CIAAW 2021 standard atomic weights ("Atomic weights").
@pytest.mark.parametrize(
    "formula, element, percent",
    [
        ("CdO", "Cd", 87.54),  # 112.414 / (112.414 + 15.999)
        ("Cd(CH3COO)2·2H2O", "Cd", 42.18),  # 112.414 / 266.532
        ("CdSe", "Cd", 58.74),  # 112.414 / 191.385
    ],
)
def test_worked_mass_fractions(formula, element, percent):
    assert 100 * parse_formula(formula).mass_fraction(element) == pytest.approx(percent, abs=0.005)


def test_cdse_molar_mass_worked_value():
    # 112.414 + 78.971 = 191.385 g/mol (CIAAW 2021).
    assert parse_formula("CdSe").molar_mass_g_per_mol == pytest.approx(191.385, abs=1e-9)


@pytest.mark.parametrize(
    "symbol, weight",
    # CIAAW 2021 standard (abridged/conventional) atomic weights as shipped in periodictable.
    [("Cd", 112.414), ("Se", 78.971), ("Te", 127.60), ("Pb", 207.2), ("Zn", 65.38), ("S", 32.06), ("In", 114.818)],
)
def test_atomic_weights(symbol, weight):
    assert atomic_weight(symbol) == pytest.approx(weight, abs=1e-6)


@pytest.mark.parametrize(
    "notation",
    ["Cd(CH3COO)2(H2O)2", "Cd(CH3COO)2·2H2O", "Cd(CH3COO)2.2H2O", "Cd(CH3COO)2*2H2O", "Cd[CH3COO]2·2H2O"],
)
def test_hydrate_notations_are_equivalent(notation):
    assert dict(parse_formula(notation).atoms) == {"Cd": 1, "C": 4, "H": 10, "O": 6}


def test_nested_parentheses():
    assert dict(parse_formula("((CH3(CH2)7)3P)").atoms) == {"C": 24, "H": 51, "P": 1}


def test_fractional_hydrate():
    # CdCl2·2.5H2O (cadmium chloride hemipentahydrate)
    assert dict(parse_formula("CdCl2·2.5H2O").atoms) == {"Cd": 1, "Cl": 2, "H": 5, "O": 2.5}


@pytest.mark.parametrize(
    "text, position, reason",
    [
        ("Qq2", 0, "unknown element 'Qq'"),
        ("Cd$O", 2, "unexpected character '$'"),
        ("Cd O", 2, "unexpected character ' '"),  # a space inside a group
        (" Cd¾", 3, "unexpected character '¾'"),  # str.isalnum() holds for '¾', the pattern is ASCII
        ("CdO·", 4, "missing group"),
        ("Cd)O", 2, "cannot parse"),
        ("", 0, "empty formula"),
    ],
)
def test_formula_errors_name_the_position(text, position, reason):
    with pytest.raises(FormulaError) as caught:
        parse_formula(text)
    assert caught.value.position == position
    assert reason in str(caught.value)
    assert isinstance(caught.value, ValueError)


def test_formula_error_prints_a_caret_under_the_bad_character():
    with pytest.raises(FormulaError) as caught:
        parse_formula("Cd$O")
    assert str(caught.value).splitlines()[1:] == ["  Cd$O", "    ^"]
