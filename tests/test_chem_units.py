"""Amounts with units (pint) and the density rule for volumes."""

from __future__ import annotations

from decimal import Decimal

import pytest

from service.chem.units import (
    MissingDensityError,
    QuantityError,
    check_amount,
    kind_of,
    mass_g,
    parse_quantity,
    whole_micro,
)


@pytest.mark.parametrize(
    "text, kind, unit, value",
    # SI prefixes and the litre/molar definitions (BIPM SI Brochure, 9th ed.).
    [
        ("250 mg", "mass", "g", 0.25),
        ("1.5 kg", "mass", "g", 1500),
        ("20 µg", "mass", "mg", 0.02),
        ("5 mL", "volume", "L", 0.005),
        ("2 uL", "volume", "mL", 0.002),
        ("0.2 mol/L", "molarity", "mmol/mL", 0.2),
        ("0.2 M", "molarity", "mol/L", 0.2),
        ("0.8 g/mL", "density", "kg/L", 0.8),
        ("300 °C", "temperature", "K", 573.15),
    ],
)
def test_parse_quantity(text, kind, unit, value):
    quantity = parse_quantity(text)
    assert kind_of(quantity) == kind
    assert quantity.to(unit).magnitude == pytest.approx(value)


@pytest.mark.parametrize(
    "text, expect, message",
    [
        ("", "mass", "an amount with a unit is required"),
        ("5", "mass", "a number needs a unit"),
        ("1,5 g", "mass", "decimal point, not a comma"),
        ("5 zz", "mass", "unknown unit 'zz'"),
        ("-3 g", "mass", "must not be negative"),
        ("5 mL", "mass", "expected a mass, got a volume"),
        ("5 g + 3 g", "mass", "not an amount with a unit"),
        ("2**100 g", "mass", "not an amount with a unit"),
    ],
)
def test_bad_quantities(text, expect, message):
    with pytest.raises(QuantityError) as caught:
        parse_quantity(text, expect=expect, field="amount")
    assert message in str(caught.value)
    assert caught.value.field == "amount"


def test_volume_needs_a_density_and_names_the_substance():
    with pytest.raises(MissingDensityError) as caught:
        mass_g(parse_quantity("5 mL"), density_g_per_ml=None, substance="trioctylphosphine")
    assert "trioctylphosphine" in str(caught.value)
    assert caught.value.substance == "trioctylphosphine"


def test_volume_to_mass_with_density():
    # Acetone 0.786 g/mL (NAS, Chemical Laboratory Safety and Security, 2016, App. D): 100 mL -> 78.6 g.
    assert mass_g(parse_quantity("100 mL"), density_g_per_ml=0.786, substance="acetone") == Decimal("78.6")


@pytest.mark.parametrize(
    "text, unit, expect, whole",
    # SI prefixes (BIPM SI Brochure, 9th ed.): 1 mL = 1000 µL, 1 g = 10^6 µg, 1 gal (US) = 3.785411784 L
    # (NIST HB 44); a half µg is rounded to the even neighbour (Python's decimal default, IEEE 754's).
    [
        ("0.5 mL", "uL", "volume", 500),
        ("1 gal", "uL", "volume", 3_785_412),
        ("0.01 mg", "ug", "mass", 10),
        ("2.5 ug", "ug", "mass", 2),
        ("3.5 ug", "ug", "mass", 4),
        ("1.25 kg", "ug", "mass", 1_250_000_000),
    ],
)
def test_whole_micro_is_the_parsed_amount_in_whole_units(text, unit, expect, whole):
    assert whole_micro(text, unit, expect=expect) == whole
    assert whole_micro(text, unit, expect=expect) == whole  # remembered: the same answer again


def test_a_refused_amount_is_refused_every_time_naming_the_field():
    for _ in range(2):  # refusals are not remembered
        with pytest.raises(QuantityError) as refused:
            whole_micro("5 mg", "uL", expect="volume", field="components[1].volume")
        assert refused.value.field == "components[1].volume" and "expected a volume" in str(refused.value)
        with pytest.raises(QuantityError):
            check_amount("1e30 g", expect=("mass",))  # beyond the 1000 kg bound
    check_amount("250 mg", expect=("mass",))
