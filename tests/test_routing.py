"""The application's URL rules build their URLs on first use, and build exactly what werkzeug's own rules build."""

from __future__ import annotations

from werkzeug.routing import Map, Rule

from service.app import LazyBuilderRule, create_app


def _sample(rule) -> dict:
    """Values for a rule's variables, with extra query arguments that need escaping."""
    values = {name: 7 if converter.regex == r"\d+" else "a b/ç" for name, converter in rule._converters.items()}
    return {**values, **(rule.defaults or {}), "q": "x&y z", "page": 2}


def test_no_builder_is_compiled_while_the_app_starts(tmp_path, monkeypatch):
    compiled = []
    original = Rule._compile_builder

    def counting(rule, append_unknown=True):
        compiled.append(rule.rule)
        return original(rule, append_unknown)

    monkeypatch.setattr(Rule, "_compile_builder", counting)
    app = create_app({"DATABASE_URL": f"sqlite:///{tmp_path / 'x.sqlite'}", "TESTING": True})
    assert all(isinstance(rule, LazyBuilderRule) for rule in app.url_map.iter_rules())
    assert compiled == []
    with app.test_request_context():
        app.url_map.bind("localhost").build("static", {"filename": "site.css"})
    assert compiled == ["/static/<path:filename>"]  # the one rule asked for, once


def test_every_url_is_what_werkzeugs_own_rules_build(tmp_path):
    """Reference: a werkzeug Map of plain ``Rule`` objects with the same paths, methods and defaults."""
    app = create_app({"DATABASE_URL": f"sqlite:///{tmp_path / 'x.sqlite'}", "TESTING": True})
    rules = list(app.url_map.iter_rules())
    plain = Map([Rule(r.rule, endpoint=r.endpoint, methods=r.methods, defaults=r.defaults) for r in rules],
                converters=app.url_map.converters)
    ours, theirs = app.url_map.bind("localhost"), plain.bind("localhost")
    assert len(rules) > 100
    for rule in rules:
        values = _sample(rule)
        for method in sorted(rule.methods - {"HEAD", "OPTIONS"}):
            assert ours.build(rule.endpoint, values, method=method) == theirs.build(rule.endpoint, values, method=method)
            assert ours.build(rule.endpoint, values, method=method, force_external=True, append_unknown=False) == \
                theirs.build(rule.endpoint, values, method=method, force_external=True, append_unknown=False)
