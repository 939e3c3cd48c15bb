"""Loading rule packs: every error names the file, the rule id and the field; layering by id."""

from __future__ import annotations

from decimal import Decimal

import pytest
import yaml

from service.chem.units import QuantityError
from service.datafiles import DataFileError
from service.rules.loader import load_pack, load_packs, parse_threshold

DISCLAIMER = "Suggestions only; local regulations and the site safety officer decide."


def rule(**changes) -> dict:
    """A valid procedure rule, with ``changes`` applied (a value of None removes the key)."""
    body = {
        "id": "site.r",
        "scope": "procedure",
        "measure": "element_mass:Cd",
        "comparator": ">=",
        "threshold": "500 mg",
        "level": "review",
        "message": "{value} over {threshold}",
        "source": "site policy",
    }
    body.update(changes)
    return {k: v for k, v in body.items() if v is not None}


def write_pack(directory, name, rules, version="1", **fields):
    """Write a pack file ``<directory>/<name>.yaml`` and return its path."""
    document = {"pack": name, "version": version, "jurisdiction": "test", "disclaimer": DISCLAIMER, "rules": rules}
    document.update(fields)
    path = directory / f"{name}.yaml"
    path.write_text(yaml.safe_dump(document, allow_unicode=True, sort_keys=False), encoding="utf-8")
    return path


def test_a_good_pack_loads(tmp_path):
    pack = load_pack(write_pack(tmp_path, "site-a", [rule()]))
    assert (pack.pack, pack.version, [r.id for r in pack.rules]) == ("site-a", "1", ["site.r"])


@pytest.mark.parametrize(
    "changes, field, phrase",
    [
        ({"measure": "element_count:Cd"}, "measure", "unknown measure 'element_count:Cd'"),
        ({"measure": "element_mass:Xx"}, "measure", "'Xx' is not an element symbol"),
        ({"measure": "element_mass:cd"}, "measure", "'cd' is not an element symbol"),
        ({"measure": "element_mass"}, "measure", "needs an argument: element_mass:<El>"),
        ({"measure": "chalcogen_with_acid:Se"}, "measure", "takes no ':<argument>'"),
        ({"threshold": "500 blorbs"}, "threshold", "unknown unit"),
        ({"threshold": "lots"}, "threshold", "not an amount with a unit"),
        ({"threshold": "500 mL"}, "threshold", "this threshold is a volume"),
        ({"threshold": "500"}, "threshold", "this threshold is a plain number without a unit"),
        ({"threshold": "-5 mg"}, "threshold", "must not be negative"),
        ({"measure": "toxic_metal_powders", "threshold": "1 mg"}, "threshold", "number; this threshold is a mass"),
        ({"measure": "max_injection_temperature", "threshold": "9 delta_degC"}, "threshold", "not a temperature diff"),
        ({"measure": "max_temperature_minus_flash_point", "threshold": "0 degC"}, "threshold", "write delta_degC or K"),
        ({"scope": "run"}, "scope", "is a procedure measure; it cannot be used in a run rule"),
        ({"comparator": None}, "comparator", "Field required"),
        ({"comparator": "=>"}, "comparator", "Input should be"),
        ({"message": "{value} of {element}"}, "message", "unknown placeholder {element}"),
        ({"source": None}, "source", "Field required"),
    ],
)
def test_bad_rules_name_file_rule_and_field(tmp_path, changes, field, phrase):
    path = write_pack(tmp_path, "site-a", [rule(id="site.ok"), rule(id="site.bad", **changes)])
    with pytest.raises(DataFileError) as info:
        load_pack(path)
    text = str(info.value)
    assert text.startswith(str(path))
    assert f"rules[1 site.bad].{field}" in text
    assert phrase in text
    assert "site.ok" not in text


def test_duplicate_id_names_both_places(tmp_path):
    path = write_pack(tmp_path, "site-a", [rule(id="site.r"), rule(id="site.x"), rule(id="site.r", level="block")])
    with pytest.raises(DataFileError) as info:
        load_pack(path)
    assert str(info.value) == f"{path}: rules[2 site.r].id: duplicate rule id (first used at rules[0])"


def test_every_problem_is_reported(tmp_path):
    path = write_pack(tmp_path, "site-a", [rule(id="site.a", threshold="5 mL"), rule(id="site.b", measure="nope")])
    with pytest.raises(DataFileError) as info:
        load_pack(path)
    assert [where for where, _ in info.value.problems] == ["rules[0 site.a].threshold", "rules[1 site.b].measure"]


def test_a_missing_file_is_named(tmp_path):
    with pytest.raises(DataFileError, match="site-z.yaml: .*cannot read"):
        load_packs(tmp_path, ["site-z"])


def test_later_pack_overrides_by_id(tmp_path):
    write_pack(tmp_path, "base", [rule(id="x.cd", level="note"), rule(id="x.se", measure="element_mass:Se")], "2026.1")
    site = [rule(id="x.cd", level="block", threshold="1 g"), rule(id="site.pb", measure="element_mass:Pb")]
    write_pack(tmp_path, "site", site, "7")
    layered = load_packs(tmp_path, ["base", "site"])
    assert layered.packs == (("base", "2026.1"), ("site", "7"))
    by_id = {active.rule.id: active for active in layered.rules}
    assert [active.rule.id for active in layered.rules] == ["x.cd", "x.se", "site.pb"]
    assert (by_id["x.cd"].pack, by_id["x.cd"].pack_version, by_id["x.cd"].overrides) == ("site", "7", "base")
    assert (by_id["x.cd"].rule.level, by_id["x.cd"].threshold_value) == ("block", Decimal(1_000_000))
    assert (by_id["x.se"].pack, by_id["x.se"].overrides) == ("base", None)
    assert by_id["site.pb"].disclaimer == DISCLAIMER


def test_order_decides_which_pack_wins(tmp_path):
    write_pack(tmp_path, "base", [rule(id="x.cd", level="note")])
    write_pack(tmp_path, "site", [rule(id="x.cd", level="block")])
    layered = load_packs(tmp_path, ["site", "base"])
    assert [(a.pack, a.rule.level, a.overrides) for a in layered.rules] == [("base", "note", "site")]


def test_rules_for_selects_the_scope(tmp_path):
    write_pack(tmp_path, "site", [rule(id="x.cd"), rule(id="x.se", measure="element_mass:Se")])
    layered = load_packs(tmp_path, ["site"])
    assert [a.rule.id for a in layered.rules_for("procedure")] == ["x.cd", "x.se"]
    first = layered.rules_for("procedure")[0]
    assert (first.id, first.scope, first.measure, first.level) == ("x.cd", "procedure", "element_mass:Cd", "review")
    assert (first.definition.name, first.definition.unit, first.argument) == ("element_mass", "ug", "Cd")
    assert layered.rules_for("waste_container") == ()
    with pytest.raises(ValueError, match="unknown scope 'container'"):
        layered.rules_for("container")


@pytest.mark.parametrize(
    "names, phrase",
    [
        (["site", "site"], "listed twice"),
        (["../site"], "must be a lowercase slug"),
        (["other"], "names pack 'site', but the file is other.yaml"),
    ],
)
def test_bad_pack_lists(tmp_path, names, phrase):
    write_pack(tmp_path, "site", [rule()])
    (tmp_path / "other.yaml").write_text((tmp_path / "site.yaml").read_text(encoding="utf-8"), encoding="utf-8")
    with pytest.raises(DataFileError, match=phrase):
        load_packs(tmp_path, names)


# Conversions checked against the unit definitions: SI prefixes (SI Brochure, 9th ed.),
# 0 °C = 273.15 K, and t/°F = 9/5 · t/°C + 32 (so 482 °F = 250 °C, 18 °F difference = 10 K).
@pytest.mark.parametrize(
    "text, unit, value, shown",
    [
        ("0.5 g", "ug", Decimal(500_000), "gram"),
        ("1.1 mg", "ug", Decimal(1100), "milligram"),  # float arithmetic gives 1100.0000000000002
        ("250 µg", "ug", Decimal(250), "microgram"),
        ("0.3 kg", "ug", Decimal(300_000_000), "kilogram"),
        ("0 delta_degC", "delta_degC", Decimal(0), "delta_degC"),
        ("0 Δ°C", "delta_degC", Decimal(0), "delta_degC"),
        ("0 K", "delta_degC", Decimal(0), "kelvin"),
        ("-10 delta_degC", "delta_degC", Decimal(-10), "delta_degC"),
        ("18 delta_degF", "delta_degC", Decimal(10), "delta_degF"),
        ("250 degC", "degC", Decimal(250), "degree_Celsius"),
        ("250 °C", "degC", Decimal(250), "degree_Celsius"),
        ("523.15 K", "degC", Decimal(250), "kelvin"),
        ("482 degF", "degC", Decimal(250), "degree_Fahrenheit"),
        ("2", "", Decimal(2), ""),
        ("150 %", "", Decimal("1.5"), "percent"),
    ],
)
def test_threshold_conversion_is_exact(text, unit, value, shown):
    assert parse_threshold(text, unit) == (value, shown)


@pytest.mark.parametrize(
    "text, unit, phrase",
    [
        ("-1", "", "must not be negative"),
        ("10 degC", "delta_degC", "write delta_degC or K"),
        ("10 delta_degF", "degC", "not a temperature difference"),
        ("10 mg", "degC", "this threshold is a mass"),
        ("5,0 mg", "ug", "decimal point"),
    ],
)
def test_bad_thresholds(text, unit, phrase):
    with pytest.raises(QuantityError, match=phrase):
        parse_threshold(text, unit)


# Both YAML loaders PyYAML offers (libyaml's C parser, used where PyYAML was built with it, and the
# pure-Python one it falls back to) must read every shipped data file the same, and name the line of
# a syntax error. The expected line numbers are counted by hand in the texts below.
LOADERS = [pytest.param(yaml.SafeLoader, id="pure-python")] + (
    [pytest.param(yaml.CSafeLoader, id="libyaml")] if hasattr(yaml, "CSafeLoader") else [])


@pytest.mark.parametrize("loader", LOADERS)
def test_each_yaml_loader_reads_the_shipped_files_alike(loader, rules_dir):
    files = sorted(rules_dir.glob("*.yaml"))
    assert len(files) >= 5, files
    for path in files:
        text = path.read_text(encoding="utf-8")
        assert yaml.load(text, Loader=loader) == yaml.load(text, Loader=yaml.SafeLoader), path


@pytest.mark.parametrize("loader", LOADERS)
@pytest.mark.parametrize("text, line", [
    ("pack: site\nrules: [1, 2\nversion: '1'\n", 3),  # the flow list is still open when line 3 starts a key
    ("pack: site\nversion: '1'\n  rules: []\n", 3),  # a mapping value where none may start
    ("pack: site\nrules:\n\t- id: x\n", 3),  # a tab cannot start a token
])
def test_a_yaml_syntax_error_names_its_line_with_either_loader(loader, text, line, tmp_path, monkeypatch):
    from service import datafiles

    monkeypatch.setattr(datafiles, "YAML_LOADER", loader)
    path = tmp_path / "site.yaml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(DataFileError) as info:
        load_pack(path)
    assert str(info.value).startswith(f"{path}: line {line}: not valid YAML: "), str(info.value)


def test_the_loader_refuses_python_objects(tmp_path):
    path = tmp_path / "site.yaml"
    path.write_text("pack: !!python/object/apply:os.getcwd []\n", encoding="utf-8")
    with pytest.raises(DataFileError, match=r"line 1: not valid YAML"):
        load_pack(path)
