"""Waste-container measures and the shipped waste rules, checked against 40 CFR and the EU List of Waste.

Sources: 40 CFR 261.24 Table 1 — D006 Cd 1.0 mg/L (seen), D010 Se 1.0 mg/L
(2nd), D022 chloroform 6.0 mg/L (seen); 261.24(a) < 0.5 % filterable solids: the waste is its
own extract (seen); 261.21(a)(1) D001 flash point < 60 °C (seen); 261.31 F003 acetone (seen),
F005 toluene ≥ 10 % by volume (2nd), chloroform and hexane not F-listed (seen) (the satellite
accumulation limits are per area: tests/test_areas.py); 262.208(a) 12 months (seen);
List of Waste 2000/532/EC as amended by 2014/955/EU: 07 07 03*, 07 07 04*, 15 02 02*, 16 05 06* (2nd).
261.21(a)(1) excludes aqueous solutions with less than 24 % alcohol by volume (seen); 261.22(a)(1) D002:
aqueous with pH ≤ 2 or ≥ 12.5 (seen). Flash points: acetone −20 °C, ethanol 13 °C, toluene 4 °C,
n-hexane −22 °C; chloroform none; chloroform density 1.498 g/mL (NAS 2016; Prudent Practices — seen).
Unit relations: 1 US gallon = 3.785411784 L and 1 US quart = 0.946352946 L exactly (NIST
Handbook 44, Appendix C). The 0.01 "trace" cut-off is the project's choice, not a regulation.
"""

from __future__ import annotations

from decimal import Decimal
from pathlib import Path

import pytest
import yaml

from service.chem.units import QuantityError
from service.datafiles import DataFileError
from service.rules.evaluate import evaluate, highest_level
from service.rules.loader import load_packs, parse_threshold
from service.rules.measures import MeasureNameError, resolve_measure, vocabulary
from service.rules.subjects import ContainerComponent, ContainerSubject

RULES = Path(__file__).resolve().parents[1] / "rules"
FLAMMABLE = frozenset({"flammable"})
ACETONE = ContainerComponent("acetone", "acetone", 1.0, -20.0, FLAMMABLE)
CHLOROFORM = ContainerComponent("chloroform", "chloroform", 1.0, None, halogenated=True, density_g_per_ml=1.498)
ALCOHOL = frozenset({"flammable", "alcohol"})


@pytest.fixture(scope="module")
def packs():
    return load_packs(RULES, ["us-federal", "eu", "site-example"])


def container(volume_l=20.0, cd_ug=25_000, components=(ACETONE,), form="liquid", **extra) -> ContainerSubject:
    facts = {"capacity_l": 25.0, "mass_kg": 0.0, **extra}
    return ContainerSubject("W-1", "solvent with heavy metals", form, volume_l, element_mass_ug={"Cd": cd_ug},
                            components=tuple(components), **facts)  # fmt: skip


def fired(packs, subject) -> dict[str, object]:
    return {f.rule_id: f for f in evaluate(packs, "waste_container", subject)}


def codes(packs, subject) -> set[str]:
    return {f.suggested_code.code for f in evaluate(packs, "waste_container", subject) if f.suggested_code}


def compute(name, subject):
    found, argument = resolve_measure(name)
    return found.compute(subject, argument)


def test_acetone_wash_with_cadmium(packs):
    """25 mg Cd in 20 L = 1.25 mg/L ≥ 1.0 (261.24 Table 1 D006); acetone −20 °C < 60 °C (261.21); F003 (261.31)."""
    findings = fired(packs, container())
    d006 = findings["us.tc-d006-cadmium"]
    assert (d006.value, d006.level) == (1.25, "review") and "Suggestion" in d006.message and "1.25 mg/L" in d006.message
    assert {"D006", "D001", "F003", "07 07 04*", "16 05 06*"} <= codes(packs, container())
    assert "spent" in findings["us.f003-acetone"].message
    for finding in findings.values():
        assert "safety officer" in finding.disclaimer and "Suggestions only" in finding.disclaimer
        assert any(word in finding.source for word in ("seen", "2nd", "from memory", "site policy"))


@pytest.mark.parametrize(
    "cd_ug, volume_l, fires",
    [
        (15_000, 20.0, False),  # 0.75 mg/L
        (20_000, 20.0, True),  # exactly 1.0 mg/L: ">=" fires
        (19_999, 20.0, False),  # 0.99995 mg/L
        (1_000, 1.0, True),  # 1 mg in 1 L
    ],
)
def test_d006_boundary(packs, cd_ug, volume_l, fires):
    assert ("us.tc-d006-cadmium" in fired(packs, container(volume_l, cd_ug))) is fires


def test_selenium_d010(packs):
    subject = ContainerSubject("W-2", "aqueous", "liquid", 10.0, 0.0, 20.0, {"Se": 10_000})  # 1.0 mg/L
    assert fired(packs, subject)["us.tc-d010-selenium"].suggested_code.code == "D010"


def test_solids_above_half_percent_need_the_extraction_test(packs):
    findings = fired(packs, container(filterable_solids_percent=1.0))
    assert "us.tc-d006-cadmium" not in findings
    assert "extraction test" in findings["us.tc-extraction-test-needed"].message
    assert compute("concentration_mg_per_l:Cd", container(filterable_solids_percent=1.0)) is None
    assert "us.tc-extraction-test-needed" not in fired(packs, container(filterable_solids_percent=0.49))


def test_solids_container_is_not_compared_in_mg_per_l(packs):
    solids = container(volume_l=0.0, form="solid", mass_kg=2.0, components=())
    assert compute("concentration_mg_per_l:Cd", solids) is None
    assert compute("filterable_solids_percent", solids).value == 100
    assert "us.tc-extraction-test-needed" in fired(packs, solids)


@pytest.mark.parametrize("toluene, f005", [(0.05, False), (0.0999, False), (0.1, True), (0.5, True)])
def test_toluene_f005_at_ten_percent(packs, toluene, f005):
    mix = (ContainerComponent("acetone", "acetone", 1 - toluene, -20.0, FLAMMABLE),
           ContainerComponent("toluene", "toluene", toluene, 4.0, FLAMMABLE))  # fmt: skip
    assert ("F005" in codes(packs, container(components=mix))) is f005


def test_chloroform_is_not_f_listed_but_halogenated(packs):
    found = codes(packs, container(components=(CHLOROFORM,)))
    assert not {code for code in found if code.startswith("F")}
    assert {"07 07 03*", "D022"} <= found and "07 07 04*" not in found
    assert "us.d001-ignitable-liquid" not in fired(packs, container(components=(CHLOROFORM,)))


def test_hexane_is_d001_only(packs):
    hexane = ContainerComponent("n-hexane", "n-hexane", 1.0, -22.0, FLAMMABLE)
    found = codes(packs, container(cd_ug=0, components=(hexane,)))
    assert "D001" in found and not {code for code in found if code.startswith("F")}


def test_trace_components_are_ignored_for_the_flash_point():
    trace = (ContainerComponent("oleic acid", "oleic-acid", 0.995, 189.0),
             ContainerComponent("n-hexane", "n-hexane", 0.005, -22.0, FLAMMABLE))  # fmt: skip
    assert compute("min_flash_point_present_c", container(components=trace)).value == 189
    present = (trace[0], ContainerComponent("n-hexane", "n-hexane", 0.01, -22.0, FLAMMABLE))
    assert compute("min_flash_point_present_c", container(components=present)).value == -22


def test_unknown_flash_point_is_not_taken_as_safe(packs):
    unknown = ContainerComponent("new solvent", None, 0.5, None, FLAMMABLE)
    water = ContainerComponent("water", "water", 0.5)
    assert fired(packs, container(components=(unknown, water)))["us.d001-unknown-flash-point"].level == "caution"


@pytest.mark.parametrize(
    "facts, rule_id, fires",
    [
        ({"capacity_l": 22.3}, "site.waste-container-headspace", False),  # 20 / 22.3 = 0.897
        ({"capacity_l": 22.0}, "site.waste-container-headspace", True),  # 20 / 22 = 0.909
    ],
)
def test_fill_limits(packs, facts, rule_id, fires):
    assert (rule_id in fired(packs, container(**facts))) is fires


def test_aqueous_waste_gets_no_solvent_code(packs):
    aqueous = container(cd_ug=5_000, components=(ContainerComponent("water", "water", 1.0),))
    found = codes(packs, aqueous)
    assert "07 07 04*" not in found and "07 07 03*" not in found and "16 05 06*" in found


@pytest.mark.parametrize("name", ["listed_solvent_fraction:Acetone", "listed_solvent_fraction:ethyl acetate"])
def test_catalogue_key_shape_is_checked(name):
    with pytest.raises(MeasureNameError, match="not a catalogue key"):
        resolve_measure(name)


@pytest.mark.parametrize(
    "text, unit, value",
    [
        ("1.0 mg/L", "mg/L", "1"),
        ("1000 ug/L", "mg/L", "1"),
        ("60 degC", "degC", "60"),
        ("60 °C", "degC", "60"),
        ("140 degF", "degC", "60"),
        ("0.1", "", "0.1"),
        ("10 %", "", "0.1"),
        ("0.5 %", "percent", "0.5"),
        ("208 L", "L", "208"),
        ("55 gallon", "L", "208.19764812"),  # 55 × 3.785411784
        ("1 quart", "L", "0.946352946"),
        ("1 kg", "kg", "1"),
        ("3 day", "day", "3"),
        ("72 hour", "day", "3"),
        ("365 day", "day", "365"),
    ],
)
def test_container_thresholds_convert_exactly(text, unit, value):
    assert parse_threshold(text, unit)[0] == Decimal(value)


@pytest.mark.parametrize(
    "text, unit, phrase",
    [("1.0 mg", "mg/L", "this threshold is a mass"), ("1.0", "mg/L", "plain number"),
     ("1 mol/L", "mg/L", "molarity"), ("5 L", "mg/L", "volume"), ("3", "day", "plain number"),
     ("60 delta_degC", "degC", "not a temperature difference")],
)  # fmt: skip
def test_container_thresholds_of_the_wrong_kind(text, unit, phrase):
    with pytest.raises(QuantityError, match=phrase):
        parse_threshold(text, unit)


def test_pack_with_a_bad_container_rule_names_the_field(tmp_path):
    rule = {"id": "site.bad", "scope": "waste_container", "measure": "concentration_mg_per_l:Cd",
            "comparator": ">=", "threshold": "5 mg", "level": "review", "message": "{value}", "source": "site policy"}
    wrong_scope = {**rule, "id": "site.scope", "scope": "procedure", "threshold": "1 mg/L"}
    document = {"pack": "bad", "version": "1", "jurisdiction": "test",
                "disclaimer": "Suggestions only; ask the officer.", "rules": [rule, wrong_scope]}  # fmt: skip
    (tmp_path / "bad.yaml").write_text(yaml.safe_dump(document), encoding="utf-8")
    with pytest.raises(DataFileError) as caught:
        load_packs(tmp_path, ["bad"])
    assert "rules[0 site.bad].threshold" in str(caught.value)
    assert "rules[1 site.scope].scope" in str(caught.value)


def test_vocabulary_lists_every_container_measure():
    table = {row["name"]: row["unit"] for row in vocabulary() if row["scope"] == "waste_container"}
    assert table == {
        "concentration_mg_per_l:<El>": "mg/L", "filterable_solids_percent": "percent",
        "min_flash_point_present_c": "degC", "flammable_components_unknown_flash_point": "",
        "listed_solvent_fraction:<key>": "", "halogenated_fraction": "", "halogen_free_solvent_fraction": "",
        "volume_l": "L", "fill_fraction": "", "mass_kg": "kg", "days_since_full": "day",
        "days_since_first_entry": "day", "acute_hazardous": "", "acute_volume_l": "L", "acute_mass_kg": "kg",
        "container_element_mass:<El>": "ug", "component_concentration_mg_per_l:<key>": "mg/L",
        "min_flash_point_outside_aqueous_alcohol_c:<percent>": "degC", "aqueous_ph": "",
        "stream_element_mass:<stream>:<El>": "ug", "element_mass_outside_stream:<stream>:<El>": "ug",
    }  # fmt: skip


def test_every_shipped_waste_rule_names_its_source_status(packs):
    """Status words: seen, 2nd, from memory; or the site policy."""
    shipped = list(packs.rules_for("waste_container"))
    assert shipped
    for active in shipped:
        assert any(word in active.rule.source for word in ("seen", "2nd", "from memory", "site policy")), active.id
        assert "safety officer" in active.disclaimer


def test_shares_in_details_read_to_one_decimal():
    # two parts acetone to one part 1-octadecene: 2/3 of the volume reads 66.7 % (not 66.666…)
    mix = (ContainerComponent("acetone", "acetone", 2 / 3, -20.0, FLAMMABLE),
           ContainerComponent("1-octadecene", "1-octadecene", 1 / 3, 149.0, FLAMMABLE))  # fmt: skip
    assert compute("listed_solvent_fraction:acetone", container(components=mix)).detail == "acetone 66.7 %"


# --- D022 chloroform, 40 CFR 261.24(b) Table 1: 6.0 mg/L -----------------------------------------


def chloroform_in(volume_l: float, chloroform_ml: float, density: float = 1.498, **extra) -> ContainerSubject:
    """A halogenated liquid waste: ``chloroform_ml`` of chloroform, the rest water, in ``volume_l``."""
    fraction = chloroform_ml / 1000 / volume_l
    parts = (ContainerComponent("chloroform", "chloroform", fraction, None, halogenated=True, density_g_per_ml=density),
             ContainerComponent("water", "water", 1 - fraction))
    return container(volume_l, 0, parts, **extra)


def test_five_ml_chloroform_in_a_litre_is_d022(packs):
    """5 mL × 1.498 g/mL = 7.49 g = 7 490 mg in 1 L: 7 490 mg/L, far above Table 1's 6.0 mg/L (D022)."""
    subject = chloroform_in(1.0, 5.0)
    finding = fired(packs, subject)["us.tc-d022-chloroform"]
    assert finding.value == 7490 and finding.unit == "mg/L" and finding.suggested_code.code == "D022"
    assert finding.threshold_value == Decimal("6.0") and "261.24" in finding.source
    assert "chloroform 5 mL × 1.498 g/mL in 1 L" in finding.detail
    assert "safety officer" in finding.disclaimer


@pytest.mark.parametrize(
    "chloroform_ml, density, fires",
    [
        (0.004, 1.5, True),  # 4 µL × 1.5 g/mL (a test density) = 6 mg in 1 L: exactly 6.0 mg/L, ">=" fires
        (0.0039, 1.5, False),  # 5.85 mg/L
        (0.004, 1.498, False),  # 4 µL of chloroform: 5.992 mg/L, just below
        (0.005, 1.498, True),  # 5 µL: 7.49 mg/L
    ],
)
def test_d022_boundary_at_six_mg_per_litre(packs, chloroform_ml, density, fires):
    assert ("us.tc-d022-chloroform" in fired(packs, chloroform_in(1.0, chloroform_ml, density))) is fires


def test_d022_follows_the_extract_basis_and_needs_a_density(packs):
    # 261.24(a): from 0.5 % filterable solids the liquid is not the extract; the extraction test decides
    findings = fired(packs, chloroform_in(1.0, 5.0, filterable_solids_percent=0.5))
    assert "us.tc-d022-chloroform" not in findings and "us.tc-extraction-test-needed" in findings
    unknown = (ContainerComponent("chloroform", "chloroform", 0.5, None, halogenated=True),)
    assert compute("component_concentration_mg_per_l:chloroform", container(components=unknown)) is None
    assert compute("component_concentration_mg_per_l:chloroform", container()).value == 0  # none recorded


# --- EU List of Waste: contaminated solids 15 02 02* instead of 16 05 06* --------------------------


def solids(stream: str, cd_ug: int) -> ContainerSubject:
    return ContainerSubject("S-1", stream, "solid", 0.0, 0.035, None, {"Cd": cd_ug} if cd_ug else {})


def test_gloves_and_wipes_with_cadmium_get_15_02_02(packs):
    """2000/532/EC as amended by 2014/955/EU: 15 02 02* absorbents, filter materials, wiping cloths,
    protective clothing contaminated by hazardous substances (2nd)."""
    found = codes(packs, solids("contaminated_solids", 2_000))
    assert "15 02 02*" in found and "16 05 06*" not in found
    finding = fired(packs, solids("contaminated_solids", 2_000))["eu.low-absorbents-cadmium"]
    assert "2000/532/EC" in finding.source and "2014/955/EU" in finding.source and "safety officer" in finding.disclaimer


@pytest.mark.parametrize(
    "stream, cd_ug, expected, absent",
    [
        ("contaminated_solids", 1, "15 02 02*", "16 05 06*"),  # 1 µg Cd: above "0 mg"
        ("contaminated_solids", 0, None, "15 02 02*"),  # no hazardous metal recorded: neither code
        ("sharps", 2_000, "16 05 06*", "15 02 02*"),  # the stream decides, not the solid form
    ],
)
def test_the_stream_decides_between_15_02_02_and_16_05_06(packs, stream, cd_ug, expected, absent):
    found = codes(packs, solids(stream, cd_ug))
    assert absent not in found and (expected is None or expected in found)
    if expected is None:
        assert "16 05 06*" not in found


def test_liquid_wastes_keep_16_05_06(packs):
    assert "15 02 02*" not in codes(packs, container()) and "16 05 06*" in codes(packs, container())


@pytest.mark.parametrize("name, phrase", [("stream_element_mass:gloves:Cd", "not a waste stream"),
                                          ("stream_element_mass:contaminated_solids", "give the stream and an element"),
                                          ("element_mass_outside_stream:sharps:cd", "not an element symbol")])
def test_stream_measure_arguments_are_checked(name, phrase):
    with pytest.raises(MeasureNameError, match=phrase):
        resolve_measure(name)


# --- D001 and the aqueous-alcohol exclusion, 40 CFR 261.21(a)(1) ------------------------------------


def water_with(alcohol_fraction: float, key: str = "ethanol", flags=ALCOHOL, flash_c: float = 13.0,
               recorded: float = 1.0) -> ContainerSubject:
    parts = (ContainerComponent(key, key, alcohol_fraction, flash_c, flags),
             ContainerComponent("water", "water", recorded - alcohol_fraction))
    return container(10.0, 0, parts)


@pytest.mark.parametrize(
    "ethanol, d001",
    [
        (0.10, False),  # 10 % ethanol in water: excluded (less than 24 % alcohol by volume)
        (0.239, False),  # 23.9 %: still excluded
        (0.24, True),  # 24 %: "less than 24 percent" no longer holds; ethanol 13 °C < 60 °C
        (0.30, True),  # 30 %
    ],
)
def test_aqueous_ethanol_is_excluded_below_24_percent(packs, ethanol, d001):
    assert ("us.d001-ignitable-liquid" in fired(packs, water_with(ethanol))) is d001


def test_the_exclusion_needs_water_and_alcohols_only(packs):
    # acetone is not an alcohol: 10 % acetone in water is not excluded (flash point −20 °C)
    assert "us.d001-ignitable-liquid" in fired(packs, water_with(0.10, "acetone", FLAMMABLE, -20.0))
    # 5 % of the volume not accounted for by any recorded component: not known to be aqueous
    assert "us.d001-ignitable-liquid" in fired(packs, water_with(0.10, recorded=0.95))
    # without water it is no aqueous solution at all
    neat = container(10.0, 0, (ContainerComponent("ethanol", "ethanol", 1.0, 13.0, ALCOHOL),))
    assert "us.d001-ignitable-liquid" in fired(packs, neat)
    finding = fired(packs, water_with(0.30))["us.d001-ignitable-liquid"]
    assert "30 % alcohol by volume" in finding.detail and "261.21(a)(1)" in finding.source


def test_alcohol_percent_argument_is_checked():
    for bad in ("24 %", "101", "-1", "x"):
        with pytest.raises(MeasureNameError, match="percentage"):
            resolve_measure(f"min_flash_point_outside_aqueous_alcohol_c:{bad}")


# --- D002 corrosivity, 40 CFR 261.22(a)(1): aqueous with pH <= 2 or >= 12.5 -------------------------


def aqueous(ph, components=(ContainerComponent("water", "water", 1.0),), form="liquid") -> ContainerSubject:
    return container(volume_l=5.0 if form == "liquid" else 0.0, cd_ug=0, components=components, form=form, ph=ph)


@pytest.mark.parametrize(
    "ph, rule_id, fires",
    [
        (2.0, "us.d002-corrosive-acid", True),
        (2.1, "us.d002-corrosive-acid", False),
        (12.4, "us.d002-corrosive-base", False),
        (12.5, "us.d002-corrosive-base", True),
        (0.0, "us.d002-corrosive-acid", True),
        (14.0, "us.d002-corrosive-base", True),
    ],
)
def test_d002_at_ph_2_and_12_5(packs, ph, rule_id, fires):
    findings = fired(packs, aqueous(ph))
    assert (rule_id in findings) is fires
    if fires:
        assert findings[rule_id].suggested_code.code == "D002" and "261.22(a)(1)" in findings[rule_id].source
        assert "safety officer" in findings[rule_id].disclaimer


@pytest.mark.parametrize("ph", [2.1, 7.0, 12.4])
def test_no_d002_between(packs, ph):
    assert "D002" not in codes(packs, aqueous(ph))


def test_d002_only_for_aqueous_liquids_with_a_ph(packs):
    assert "D002" not in codes(packs, aqueous(None))  # no pH recorded
    mostly_acetone = (ContainerComponent("acetone", "acetone", 0.6, -20.0, FLAMMABLE),
                      ContainerComponent("water", "water", 0.4))  # fmt: skip
    assert "D002" not in codes(packs, aqueous(1.0, mostly_acetone))  # not aqueous: 60 % organic
    half = (ContainerComponent("acetone", "acetone", 0.5, -20.0, FLAMMABLE), ContainerComponent("water", "water", 0.5))
    assert "D002" in codes(packs, aqueous(1.0, half))  # half organic: still aqueous (our reading)
    assert "D002" in codes(packs, aqueous(1.0, ()))  # nothing recorded against it: taken as aqueous
    assert compute("aqueous_ph", aqueous(1.0, (), form="solid")) is None
