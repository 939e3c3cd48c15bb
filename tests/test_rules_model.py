"""Rule-pack models: structure, allowed words and message placeholders."""

from __future__ import annotations

import pytest
from pydantic import ValidationError

from service.rules.model import Rule, RulePack, message_placeholders

GOOD_RULE = {
    "id": "site.cd-per-batch-review",
    "scope": "procedure",
    "measure": "element_mass:Cd",
    "comparator": ">=",
    "threshold": "500 mg",
    "level": "review",
    "message": "Cadmium {value} (review at {threshold}; {detail})",
    "source": "site policy — set by your safety officer",
}


def test_a_good_rule_parses():
    rule = Rule.model_validate(GOOD_RULE)
    assert (rule.id, rule.level, rule.suggested_code) == ("site.cd-per-batch-review", "review", None)


@pytest.mark.parametrize(
    "field, value, phrase",
    [
        ("id", "Site.CD", "should match pattern"),
        ("id", "no-dot", "should match pattern"),
        ("id", "site..x", "should match pattern"),
        ("scope", "container", "'procedure', 'run', 'waste_container', 'inventory', 'accumulation_area' or 'generator_month'"),
        ("level", "warning", "'note', 'caution', 'review' or 'block'"),
        ("comparator", "=>", "Input should be '>'"),
        ("comparator", "gt", "Input should be '>'"),
        ("source", "", "at least 1 character"),
        ("message", "{value} of {element}", "unknown placeholder {element}"),
        ("suggested_code", {"system": "EPA", "code": "D006"}, "'RCRA', 'EU-LoW', 'UN' or 'CLP'"),
        ("colour", "red", "Extra inputs are not permitted"),
    ],
)
def test_bad_rule_fields(field, value, phrase):
    with pytest.raises(ValidationError) as info:
        Rule.model_validate({**GOOD_RULE, field: value})
    assert phrase in str(info.value)
    assert info.value.errors()[0]["loc"][0] == field


@pytest.mark.parametrize("missing", ["comparator", "threshold", "source", "level", "scope", "measure", "message"])
def test_required_rule_fields(missing):
    body = {k: v for k, v in GOOD_RULE.items() if k != missing}
    with pytest.raises(ValidationError) as info:
        Rule.model_validate(body)
    assert info.value.errors()[0]["loc"] == (missing,)
    assert info.value.errors()[0]["type"] == "missing"


@pytest.mark.parametrize("value, text", [(0, "0"), (2, "2"), (1.5, "1.5"), ("10 mg", "10 mg")])
def test_a_bare_yaml_number_becomes_threshold_text(value, text):
    assert Rule.model_validate({**GOOD_RULE, "threshold": value}).threshold == text


def test_suggested_code_is_kept():
    code = {"system": "RCRA", "code": "D006", "description": "toxicity characteristic, cadmium"}
    rule = Rule.model_validate({**GOOD_RULE, "suggested_code": code})
    assert (rule.suggested_code.system, rule.suggested_code.code) == ("RCRA", "D006")


@pytest.mark.parametrize(
    "message, names",
    [
        ("plain text", []),
        ("{value} over {threshold}", ["value", "threshold"]),
        ("{detail} and {value} again {value}", ["detail", "value", "value"]),
        ("literal {{braces}} stay", []),
    ],
)
def test_message_placeholders(message, names):
    assert message_placeholders(message) == names


@pytest.mark.parametrize(
    "message, phrase",
    [
        ("{limit}", "unknown placeholder {limit}"),
        ("{}", "unknown placeholder {}"),
        ("{0}", "unknown placeholder {0}"),
        ("{value.real}", "unknown placeholder {value.real}"),
        ("{value[0]}", "unknown placeholder {value[0]}"),
        ("{value:.2f}", "takes no format"),
        ("{value!r}", "takes no format"),
        ("{value", "expected '}'"),
    ],
)
def test_bad_message_placeholders(message, phrase):
    with pytest.raises(ValueError, match=None) as info:
        message_placeholders(message)
    assert phrase in str(info.value)


PACK = {
    "pack": "site-example",
    "version": "2026.12",
    "jurisdiction": "Example site policy",
    "disclaimer": "Suggestions only; local regulations and the site safety officer decide.",
    "rules": [GOOD_RULE],
}


@pytest.mark.parametrize(
    "field, value, phrase",
    [
        ("pack", "Site Example", "should match pattern"),
        ("version", 2026.12, "valid string"),
        ("disclaimer", "Suggestions.", "at least 20 characters"),
        ("disclaimer", None, "valid string"),
    ],
)
def test_bad_pack_fields(field, value, phrase):
    with pytest.raises(ValidationError) as info:
        RulePack.model_validate({**PACK, field: value})
    assert phrase in str(info.value)


def test_a_pack_needs_a_disclaimer():
    body = {k: v for k, v in PACK.items() if k != "disclaimer"}
    with pytest.raises(ValidationError, match="disclaimer"):
        RulePack.model_validate(body)
