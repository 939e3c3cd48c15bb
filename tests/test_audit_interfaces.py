"""The audit trail through its interfaces: `dotledger audit-verify` and /api/v1/audit_events."""

from __future__ import annotations

import datetime as dt

from click.testing import CliRunner
from sqlalchemy import create_engine, text

from service.cli import main
from tests.conftest import Api, make_user


def test_audit_verify_names_the_tampered_event(sqlite_url, monkeypatch):
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    runner = CliRunner()
    assert runner.invoke(main, ["demo"]).exit_code == 0
    intact = runner.invoke(main, ["audit-verify"])
    assert intact.exit_code == 0 and "audit chain intact" in intact.output
    engine = create_engine(sqlite_url)
    with engine.begin() as conn:
        target = conn.execute(text("SELECT id FROM audit_events WHERE entity = 'stocks' ORDER BY id LIMIT 1 OFFSET 3")).scalar()
        conn.execute(text("UPDATE audit_events SET after = :after WHERE id = :id"),
                     {"after": '{"label": "NG-0004", "amount_text": "1 g"}', "id": target})
    engine.dispose()
    broken = runner.invoke(main, ["audit-verify"])
    assert broken.exit_code == 1
    assert f"BROKEN at event {target}:" in broken.output


def test_cli_changes_are_attributed_to_the_command(sqlite_url, monkeypatch):
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    CliRunner().invoke(main, ["demo"])
    engine = create_engine(sqlite_url)
    with engine.connect() as conn:
        actors = set(conn.execute(text("SELECT DISTINCT actor_label FROM audit_events")).scalars())
    engine.dispose()
    # The demo's procedures are registered and decided in the names of its accounts.
    assert actors == {"cli:init", "cli:demo", "researcher@example.org", "safety@example.org"}


def test_add_user_command(sqlite_url, monkeypatch):
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    runner = CliRunner()
    ok = runner.invoke(main, ["add-user", "boss@test.example", "--name", "Boss", "--role", "admin",
                              "--password", "a long admin password"])
    assert ok.exit_code == 0 and "created boss@test.example (admin)" in ok.output
    again = runner.invoke(main, ["add-user", "boss@test.example", "--name", "Boss", "--role", "admin",
                                 "--password", "a long admin password"])
    assert again.exit_code == 1 and "exists" in again.output
    short = runner.invoke(main, ["add-user", "x@test.example", "--name", "X", "--role", "admin", "--password", "short"])
    assert short.exit_code == 1 and "password" in short.output
    nolab = runner.invoke(main, ["add-user", "y@test.example", "--name", "Y", "--role", "researcher",
                                 "--lab", "Q-0", "--password", "a long enough password"])
    assert nolab.exit_code == 1 and "no lab with code 'Q-0'" in nolab.output


def test_audit_events_api_for_auditors_only(app, client, api):
    lab = api.call("POST", "/labs", {"code": "L-1", "name": "Lab"}, 201)
    api.call("PATCH", f"/labs/{lab['id']}", {"name": "Lab renamed"})
    auditor = Api(client, make_user(app, "aud@test.example", "auditor"))
    events = auditor.call("GET", f"/audit_events?entity=labs&entity_id={lab['id']}")["items"]
    assert [e["action"] for e in events] == ["create", "update"]
    assert events[1]["before"]["name"] == "Lab" and events[1]["after"]["name"] == "Lab renamed"
    assert events[0]["actor_label"] == "admin@test.example"
    assert events[1]["prev_hash"] == events[0]["hash"]
    later = (dt.datetime.now(dt.timezone.utc) + dt.timedelta(hours=1)).isoformat()
    assert auditor.call("GET", f"/audit_events?since={later.replace('+', '%2B')}")["items"] == []
    auditor.call("POST", "/labs", {"code": "L-2", "name": "x"}, 403)  # the auditor changes nothing
    researcher = Api(client, make_user(app, "r@test.example", "researcher"))
    researcher.call("GET", "/audit_events", expect=403)
    auditor.call("GET", "/audit_events?limit=0", expect=422)
