"""`qualplan serve --workers N`: refused on SQLite and without a shared web secret."""

from __future__ import annotations

import pytest

from qualplan.cli import main


def run(capsys, monkeypatch, *args: str, secret: str | None = None) -> tuple[int, str]:
    if secret is None:
        monkeypatch.delenv("QUALPLAN_WEB_SECRET", raising=False)
    else:
        monkeypatch.setenv("QUALPLAN_WEB_SECRET", secret)
    try:
        main(list(args))
        code = 0
    except SystemExit as exc:
        code = int(exc.code or 0)
    return code, capsys.readouterr().err


def test_several_workers_refused_on_sqlite(tmp_path, capsys, monkeypatch):
    code, err = run(capsys, monkeypatch, "serve", "--workers", "2", "--db",
                    f"sqlite:///{tmp_path / 'q.db'}", secret="s3cret")
    assert code == 2 and "SQLite" in err and "PostgreSQL" in err and err.count("\n") == 1


@pytest.mark.parametrize("secret", [None, "s3cret"])
def test_several_workers_on_postgresql_need_the_secret(capsys, monkeypatch, secret):
    # port 1 on loopback: nothing listens, so with the secret set the next check (the
    # database itself) fails; without it the secret is refused before any connection
    code, err = run(capsys, monkeypatch, "serve", "--workers", "3", "--db",
                    "postgresql://nobody@127.0.0.1:1/none", secret=secret)
    assert code == 2
    if secret is None:
        assert "QUALPLAN_WEB_SECRET" in err
    else:
        assert "QUALPLAN_WEB_SECRET" not in err


def test_zero_workers_refused(tmp_path, capsys, monkeypatch):
    code, err = run(capsys, monkeypatch, "serve", "--workers", "0", "--db",
                    f"sqlite:///{tmp_path / 'q.db'}")
    assert code == 2 and "--workers=0" in err
