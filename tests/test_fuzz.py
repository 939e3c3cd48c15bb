"""Schema-driven fuzzing of the API with schemathesis (an outside package) against the generated document.

Every operation of /api/v1/openapi.json gets a bounded, seeded set of generated requests through the
WSGI app, once with a researcher's token and once with an administrator's, on a fresh SQLite database
with the demo scenario. Each answer must be no server error, carry a status the document lists for the
operation, and match the documented schema and media type. Revoking a token and changing or retiring
one's own account would end the run's own access, so the random run leaves them out and the plain
tests below check them.
"""

from __future__ import annotations

import pytest

schemathesis = pytest.importorskip("schemathesis")
from hypothesis import HealthCheck, Phase, assume, given, settings  # noqa: E402
from schemathesis import GenerationMode  # noqa: E402
from schemathesis.checks import not_a_server_error  # noqa: E402
from schemathesis.specs.openapi.checks import (  # noqa: E402
    content_type_conformance,
    response_schema_conformance,
    status_code_conformance,
)
from sqlalchemy import select  # noqa: E402

from service import appdata  # noqa: E402
from service.store import identity  # noqa: E402
from service.store.db import session_scope  # noqa: E402
from service.store.demo import load_scenario  # noqa: E402
from service.store.models import User  # noqa: E402
from tests.conftest import Api, make_app  # noqa: E402

EXAMPLES_PER_OPERATION = 20
CHECKS = [not_a_server_error, status_code_conformance, response_schema_conformance, content_type_conformance]
# Operations on the caller's own access: fuzzed without the caller's own id, or not at all.
NOT_FUZZED = {("POST", "/api/v1/tokens/{ident}/revoke")}
NOT_ON_SELF = {("PATCH", "/api/v1/users/{ident}"), ("POST", "/api/v1/users/{ident}/retire")}


def demo_app(sqlite_url, rules_dir):
    app = make_app(sqlite_url, rules_dir)
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        load_scenario(session, appdata.catalogue(app), app.extensions["dotledger.rules"],
                      app.config["BALANCE_TOLERANCE"], app.config["BALANCE_ELEMENTS"])
    return app


def token_for(app, email: str) -> tuple[str, int]:
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        user = session.scalar(select(User).where(User.email == email))
        return identity.issue_token(session, user, "fuzz").secret, user.id


def fuzz(app, token: str, own_id: int) -> dict:
    """Run every operation's generated cases; answer the figures and every failure seen (none raised)."""
    schema = schemathesis.openapi.from_wsgi("/api/v1/openapi.json", app)
    headers = {"Authorization": f"Bearer {token}"}
    figures = {"operations": 0, "cases": 0, "server_errors": 0, "failures": []}
    for result in schema.get_all_operations():
        operation = result.ok()
        key = (operation.method.upper(), operation.path if operation.path.startswith("/api/") else
               f"/api/v1{operation.path}")
        if key in NOT_FUZZED:
            continue
        figures["operations"] += 1
        seen: set[str] = set()
        for mode in (GenerationMode.POSITIVE, GenerationMode.NEGATIVE):
            if mode is GenerationMode.NEGATIVE and not (operation.body or list(operation.iter_parameters())):
                continue  # nothing to make invalid
            _run(operation.as_strategy(generation_mode=mode), key, headers, own_id, figures, seen)
    return figures


def _titles(exc: BaseException) -> str:
    found = exc.exceptions if isinstance(exc, BaseExceptionGroup) else [exc]
    return "; ".join(str(e).strip().splitlines()[0] if str(e).strip() else type(e).__name__ for e in found)


def _run(strategy, key, headers, own_id, figures, seen) -> None:
    @settings(max_examples=EXAMPLES_PER_OPERATION, deadline=None, derandomize=True, database=None,
              phases=[Phase.explicit, Phase.generate], suppress_health_check=list(HealthCheck))
    @given(case=strategy)
    def run(case):
        if key in NOT_ON_SELF:
            assume((case.path_parameters or {}).get("ident") != own_id)
        response = case.call(headers=headers)
        figures["cases"] += 1
        if response.status_code >= 500:
            figures["server_errors"] += 1
        try:
            case.validate_response(response, checks=CHECKS, headers=headers)
        except (Exception, BaseExceptionGroup) as exc:  # one line per distinct failure of the operation
            line = f"{key[0]} {key[1]} -> {response.status_code}: {_titles(exc)}"
            if line not in seen:
                seen.add(line)
                figures["failures"].append(f"{line}\n    {case.as_curl_command(headers=headers)}")

    run()


@pytest.mark.slow
@pytest.mark.parametrize("email", ["researcher@example.org", "admin@example.org"])
def test_generated_requests_get_documented_answers_and_no_server_error(email, sqlite_url, rules_dir):
    app = demo_app(sqlite_url, rules_dir)
    try:
        token, own_id = token_for(app, email)
        figures = fuzz(app, token, own_id)
    finally:
        app.extensions["dotledger.engine"].dispose()
    print(f"\nfuzz as {email}: {figures['operations']} operations, {figures['cases']} cases, "
          f"{figures['server_errors']} server errors, {len(figures['failures'])} distinct failures")
    assert figures["operations"] >= 60 and figures["cases"] >= 10 * figures["operations"], figures
    assert figures["server_errors"] == 0 and not figures["failures"], "\n".join(figures["failures"])


# --- what the random run leaves out ------------------------------------------------------------------


def test_a_revoked_token_no_longer_signs_in(app, client):
    from tests.conftest import make_user

    api = Api(client, make_user(app, "r@test.example", "researcher"))
    own = api.call("GET", "/tokens")["items"][0]
    assert api.call("POST", f"/tokens/{own['id']}/revoke")["revoked_at"]
    api.call("GET", "/me", expect=401)


def test_an_administrator_cannot_retire_their_own_account(api):
    me = api.call("GET", "/me")
    body = api.call("POST", f"/users/{me['id']}/retire", expect=409)
    assert body["error"]["code"] == "conflict"
    assert api.call("GET", "/me")["retired_at"] is None
