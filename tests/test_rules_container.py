"""Waste-container measures and the shipped waste rules, checked against 40 CFR and the EU List of Waste.

Sources: 40 CFR 261.24 Table 1 — D006 Cd 1.0 mg/L (seen), D010 Se 1.0 mg/L
(2nd), D022 chloroform 6.0 mg/L (seen); 261.24(a) < 0.5 % filterable solids: the waste is its
own extract (seen); 261.21(a)(1) D001 flash point < 60 °C (seen); 261.31 F003 acetone (seen),
F005 toluene ≥ 10 % by volume (2nd), chloroform and hexane not F-listed (seen) (the satellite
accumulation limits are per area: tests/test_areas.py); List of Waste 2000/532/EC: 07 07 03*, 07 07 04*, 16 05 06* (2nd). Flash points: acetone −20 °C,
toluene 4 °C, n-hexane −22 °C; chloroform none (NAS 2016; Prudent Practices — seen).
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
CHLOROFORM = ContainerComponent("chloroform", "chloroform", 1.0, None, halogenated=True)


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
        "container_element_mass:<El>": "ug",
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
