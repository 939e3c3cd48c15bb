"""Findings evaluated once per record per session (one session serves one request or one command).

A view that shows a record, a workflow step that judges it and a document that prints it in
the same request share one evaluation. The memo is keyed by scope and record id and answers
only for the same rules and equal facts, so a record changed in between is evaluated again.
"""

from __future__ import annotations

from typing import Hashable

from sqlalchemy.orm import Session

from service.rules import Finding, LayeredRules, evaluate

__all__ = ["evaluate_once"]

_MEMO = "dotledger.findings"


def evaluate_once(session: Session, rules: LayeredRules, scope: str, key: Hashable, subject: object) -> list[Finding]:
    """The findings of ``rules`` for ``subject``, evaluated at most once per session for the same facts."""
    memo = session.info.setdefault(_MEMO, {})
    seen = memo.get((scope, key))
    if seen is not None and seen[0] is rules and seen[1] == subject:
        return list(seen[2])
    findings = evaluate(rules, scope, subject)
    memo[(scope, key)] = (rules, subject, tuple(findings))
    return findings
