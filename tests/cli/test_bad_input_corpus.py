"""The bad-input corpus through the CLI.

Every command (found by walking the typer app, so a new command is covered without a
change here) is run with each bad value in every argument and option; none may print a
traceback, and a failure is one line. Named cases check the message and that the
database is unchanged (row counts and a content hash of every table).
"""

from __future__ import annotations

import pytest
import typer
from sqlalchemy import create_engine

from qualplan.cli import app, main
from qualplan.store.session import make_sessionmaker, normalise_url
from tests.corpus import changed, db_state, npz_bytes

#: Commands not run here: they serve (the server; the worker, which on PostgreSQL would
#: wait on the queue for ever), build a whole demo, or change the schema.
SKIP = {"serve", "worker", "demo", "db downgrade", "db upgrade", "init", "version"}
BAD_VALUES = ["nan", "-inf", "2_000", str(2**70), "-1", "", "\x1b[2J\x1b[31mred", "../x",
              "a\nb", "a\x00b"]


def _commands():
    out = []

    def walk(c, prefix):
        if hasattr(c, "commands"):
            for name, sub in c.commands.items():
                walk(sub, [*prefix, name])
        elif " ".join(prefix) not in SKIP:
            out.append((prefix, c))

    walk(typer.main.get_command(app), [])
    return out


COMMANDS = _commands()


def run(capsys, *args: str) -> tuple[int, str, str]:
    try:
        main(list(args))
        code = 0
    except SystemExit as exc:
        code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture(scope="module")
def db(tmp_path_factory):
    """One initialised database with a program, a product and a phase."""
    from tests.dbutil import TestDatabase

    test_db = TestDatabase(tmp_path_factory.mktemp("cli-corpus"))
    url = test_db.create()
    for args in (["init"], ["program", "add", "Corpus"], ["product", "add", "unit"],
                 ["phase", "add", "road", "--duration-s", "60"]):
        try:
            main([*args, "--db", url])
        except SystemExit as exc:
            assert not exc.code, args
    yield url
    test_db.drop()


@pytest.fixture(scope="module")
def factory(db):
    engine = create_engine(normalise_url(db))
    yield make_sessionmaker(engine)
    engine.dispose()


def _argv(prefix, command, bad: str) -> list[str]:
    argv = list(prefix)
    for p in command.params:
        if p.name in ("db", "help") or p.param_type_name not in ("argument", "option"):
            continue
        if p.param_type_name == "argument":
            argv.append(bad)
        elif not getattr(p, "is_flag", False) and not getattr(p, "count", False):
            argv += [p.opts[0], bad]
    return argv


@pytest.mark.parametrize("bad", BAD_VALUES, ids=repr)
@pytest.mark.parametrize("prefix, command", COMMANDS, ids=[" ".join(p) for p, _ in COMMANDS])
def test_no_command_prints_a_traceback(capsys, db, factory, prefix, command, bad):
    before = db_state(factory)
    code, out, err = run(capsys, *_argv(prefix, command, bad), "--db", db)
    assert "Traceback" not in out + err, (prefix, bad, err[-2000:])
    assert code in (0, 1, 2), (code, err)
    if code != 0:
        assert err.strip(), "a failure says why"
        assert "\x1b" not in err and "\x00" not in err, repr(err)
        after = db_state(factory)
        assert after == before, changed(before, after)
    assert "\x1b" not in out, repr(out)  # escape sequences are shown, never sent


@pytest.mark.parametrize("args, needle", [
    (["report", "spec", "--product", "unit", "--number", "../x", "--program", "Corpus"],
     "number"),
    (["report", "spec", "--product", "unit", "--number", "/etc/x", "--program", "Corpus"],
     "number"),
    (["report", "audit", "--number", "..\\x", "--program", "Corpus"], "number"),
    (["program", "add", "bad\nname"], "name"),
    (["program", "add", "   "], "name"),
    (["program", "add", "x\x00y"], "name"),
    (["program", "add", "\x1b]0;owned\x07"], "name"),
    (["product", "add", "box", "--mass-kg", "nan", "--program", "Corpus"], "mass_kg"),
    (["product", "add", "box", "--mass-kg", "inf", "--program", "Corpus"], "mass_kg"),
    (["product", "add", "box", "--mass-kg", "0", "--program", "Corpus"], "mass_kg"),
    (["phase", "add", "p", "--duration-s", "0", "--program", "Corpus"], "duration_s"),
    (["phase", "add", "p", "--duration-s", "-inf", "--program", "Corpus"], "duration_s"),
    (["phase", "add", "p", "--duration-s", "60", "--occurrences", "0", "--program",
      "Corpus"], "occurrences"),
    (["level", "show", str(2**70)], "level"),
    (["waive", "REQ-1", "--rationale", "a long enough reason", "--days", "100000000"], "days"),
], ids=lambda v: " ".join(v) if isinstance(v, list) else v)
def test_named_cases(capsys, db, factory, args, needle):
    before = db_state(factory)
    code, out, err = run(capsys, *args, "--db", db)
    assert code == 2, (code, out, err)
    assert needle in err, err
    assert "Traceback" not in err
    assert db_state(factory) == before


BAD_FILES = [
    ("latin1.csv", "freq_hz,asd\n20,0.01\n2000,0.01\n# café\n".encode("latin-1"),
     ["--kind", "random", "--units", "g^2/Hz"], "UTF-8"),
    ("extra.csv", b"100,10,5\n1000,100,5\n", ["--kind", "shock", "--units", "g"], "columns"),
    ("under.csv", b"20,0.01\n2_000,0.01\n", ["--kind", "random", "--units", "g^2/Hz"], "row 2"),
    ("nul.csv", b"20,0.01\n\x00\n", ["--kind", "random", "--units", "g^2/Hz"], "NUL"),
    ("rec.npy", npz_bytes(), ["--kind", "time_history", "--units", "g", "--sample-rate-hz",
                              "1000"], ".npy"),
    ("two.csv", b"time_s,accel_g\n0,1\n0.001,2\n0.002,3\n",
     ["--kind", "time_history", "--units", "g", "--sample-rate-hz", "1000"], "fs_hz"),
    ("sine.json", b'{"bands": [{"f_lo_hz": 5, "f_hi_hz": 100, "quantity": "displacement", '
                  b'"amplitude": 2.0, "unit": "m", "measure": "peak"}]}',
     ["--kind", "sine"], "implausible"),
]


@pytest.mark.parametrize("name, content, options, needle", BAD_FILES,
                         ids=[f[0] for f in BAD_FILES])
def test_bad_files(capsys, db, factory, tmp_path, name, content, options, needle):
    path = tmp_path / name
    path.write_bytes(content)
    before = db_state(factory)
    code, out, err = run(capsys, "env", "add", "bad file", "--product", "unit", "--axis", "X",
                         "--file", str(path), *options, "--program", "Corpus", "--db", db)
    assert code == 2, (code, out, err)
    assert needle.lower() in err.lower(), err
    assert len(err.strip().splitlines()) == 1, err
    assert db_state(factory) == before
