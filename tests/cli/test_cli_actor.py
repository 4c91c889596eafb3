"""Who the CLI acts as: the first `init` makes the admin; later commands act as the user
of a token (--token / QUALPLAN_TOKEN) or of the login name (QUALPLAN_ACTOR), with that
user's roles; a name that is not a user is refused in one line (exit 2)."""

from __future__ import annotations

import json

import pytest
from sqlalchemy import select

from qualplan.cli import main
from qualplan.store import models as m
from qualplan.store.session import make_engine, make_sessionmaker


def run(capsys, *args: str) -> tuple[int, str, str]:
    try:
        main(list(args))
        code = 0
    except SystemExit as exc:
        code = int(exc.code or 0)
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def db(fresh_db_url, capsys, monkeypatch):
    monkeypatch.setenv("QUALPLAN_ACTOR", "chief")
    monkeypatch.delenv("QUALPLAN_TOKEN", raising=False)
    code, out, err = run(capsys, "init", "--db", fresh_db_url)
    assert code == 0, err
    assert "first admin: chief" in out
    return fresh_db_url


def _events(url) -> list[tuple[str, str, str]]:
    engine = make_engine(url)
    try:
        with make_sessionmaker(engine)() as session:
            return [(e.actor, e.action, e.entity)
                    for e in session.scalars(select(m.Event).order_by(m.Event.id))]
    finally:
        engine.dispose()


def test_first_init_makes_the_admin_and_a_second_init_changes_nothing(db, capsys):
    code, out, _ = run(capsys, "init", "--db", db)
    assert code == 0 and "first admin" not in out
    code, out, _ = run(capsys, "user", "list", "--db", db, "--json")
    assert code == 0
    assert [(u["name"], u["role"]) for u in json.loads(out)] == [("chief", "admin")]


def test_a_name_that_is_not_a_user_is_refused(db, capsys, monkeypatch):
    monkeypatch.setenv("QUALPLAN_ACTOR", "stranger")
    before = _events(db)
    code, out, err = run(capsys, "program", "add", "Loose program", "--db", db)
    assert code == 2 and err.count("\n") == 1
    assert "'stranger' is not an active user" in err and "Traceback" not in err
    assert _events(db) == before


def test_cli_acts_with_the_users_roles_per_program(db, capsys, monkeypatch):
    assert run(capsys, "program", "add", "Kestrel", "--db", db)[0] == 0
    assert run(capsys, "program", "add", "Osprey", "--db", db)[0] == 0
    assert run(capsys, "user", "add", "vera", "--role", "engineer", "--db", db)[0] == 0
    code, _, err = run(capsys, "user", "grant", "vera", "--role", "viewer",
                       "--program", "Kestrel", "--db", db)
    assert code == 0, err
    code, out, _ = run(capsys, "user", "members", "--program", "Kestrel", "--db", db, "--json")
    assert json.loads(out) == [{"user": "vera", "role": "viewer"}]

    monkeypatch.setenv("QUALPLAN_ACTOR", "vera")
    # vera sees Kestrel only
    code, out, _ = run(capsys, "program", "list", "--db", db, "--json")
    assert code == 0 and [p["name"] for p in json.loads(out)] == ["Kestrel"]
    # a viewer there: adding a product is refused in one line
    code, _, err = run(capsys, "product", "add", "Gimbal", "--program", "Kestrel", "--db", db)
    assert code == 2 and "needs the role engineer" in err and "vera is viewer" in err
    # Osprey does not exist for her
    code, _, err = run(capsys, "product", "add", "Gimbal", "--program", "Osprey", "--db", db)
    assert code == 2 and "not found" in err
    # she may not manage users
    code, _, err = run(capsys, "user", "add", "mallory", "--role", "admin", "--db", db)
    assert code == 2 and "admin" in err
    # every event names a stored user
    names = {a for a, _, _ in _events(db)}
    assert names <= {"chief", "vera"}


def test_token_selects_the_user(db, capsys, monkeypatch):
    assert run(capsys, "user", "add", "tom", "--role", "engineer", "--db", db)[0] == 0
    code, token, _ = run(capsys, "token", "create", "tom", "--db", db)
    token = token.strip()
    assert code == 0 and token.startswith("qp_")
    # the login name is not a user, the token decides
    monkeypatch.setenv("QUALPLAN_ACTOR", "nobody-here")
    code, _, err = run(capsys, "--token", token, "program", "add", "Tern", "--db", db)
    assert code == 0, err
    monkeypatch.setenv("QUALPLAN_TOKEN", token)
    code, out, _ = run(capsys, "program", "list", "--db", db, "--json")
    assert [p["name"] for p in json.loads(out)] == ["Tern"]
    assert ("tom", "create", "program") in _events(db)
    # a revoked token stops the CLI as well
    monkeypatch.setenv("QUALPLAN_ACTOR", "chief")
    monkeypatch.delenv("QUALPLAN_TOKEN")
    assert run(capsys, "token", "revoke", token[:10], "--db", db)[0] == 0
    code, _, err = run(capsys, "--token", token, "program", "list", "--db", db)
    assert code == 2 and "unknown or revoked" in err
