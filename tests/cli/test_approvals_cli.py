"""Withdrawal, re-derivation, baselines, previews and sign-off as a user runs them from
the command line."""

from __future__ import annotations

import json
import math
import re

import pytest
from pypdf import PdfReader

from qualplan.cli import main

ROAD = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.2, 0.2]}
FLIGHT = {"freq_hz": [20.0, 100.0, 1000.0, 2000.0], "asd_g2_hz": [0.1, 0.3, 0.3, 0.1]}


def run(capsys, *args: str) -> tuple[int, str, str]:
    try:
        main(list(args))
        code = 0
    except SystemExit as exc:
        code = int(exc.code or 0)
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def story(fresh_db_url, capsys):
    db = fresh_db_url
    ok = lambda *a: run(capsys, *a, "--db", db)  # noqa: E731
    assert run(capsys, "init", "--db", db)[0] == 0
    assert ok("program", "add", "Ridge survey drone")[0] == 0
    assert ok("product", "add", "Camera electronics", "--mass-kg", "2.4")[0] == 0
    assert ok("phase", "add", "road transport", "--duration-s", "3600")[0] == 0
    assert ok("phase", "add", "survey flight", "--duration-s", "1800")[0] == 0
    for name, phase, data in (("road Z", "road transport", ROAD),
                              ("flight Z", "survey flight", FLIGHT)):
        code, out, err = ok("env", "add", name, "--product", "Camera electronics", "--kind",
                            "random", "--axis", "Z", "--phase", phase, "--data",
                            json.dumps(data))
        assert code == 0, err
    envs = json.loads(ok("env", "list", "--json")[1])
    revs = [json.loads(ok("env", "history", str(e["id"]), "--json")[1])[0]["id"] for e in envs]
    code, out, err = ok("level", "derive", "random Z", "--product", "Camera electronics",
                        "--kind", "random", "--axis", "Z", "--revisions",
                        ",".join(map(str, revs)), "--json")
    assert code == 0, err
    return ok, {e["name"]: e["id"] for e in envs}, json.loads(out)


def test_rederive_shows_db_then_stores_only_when_confirmed(story, capsys, monkeypatch):
    ok, envs, level = story
    doubled = {**FLIGHT, "asd_g2_hz": [2 * a for a in FLIGHT["asd_g2_hz"]]}
    assert ok("env", "revise", str(envs["flight Z"]), "--note", "new flight data",
              "--data", json.dumps(doubled))[0] == 0
    monkeypatch.setattr("sys.stdin", __import__("io").StringIO("n\n"))
    code, out, _ = ok("level", "rederive", str(level["id"]))
    assert code == 1 and "not stored" in out
    # ASD x 2 where the flight environment governs: 10 log10 2 = +3.01 dB (closed form)
    assert f"{10 * math.log10(2):+.2f} dB" in out and "flight Z: revision 1 -> 2" in out
    listed = json.loads(ok("level", "list", "--json")[1])
    assert [x["number"] for x in listed] == [1]
    code, out, err = ok("level", "rederive", str(level["id"]), "--yes")
    assert code == 0, err
    assert "stored random Z #2" in out and "#1 is superseded" in out
    code, out, _ = ok("level", "show", str(level["id"]))
    assert "STALE: superseded by random Z #2" in out


def test_withdraw_preview_issue_and_sign(story, capsys, monkeypatch, tmp_path):
    ok, envs, level = story
    code, out, err = ok("env", "withdraw", str(envs["flight Z"]), "--reason", "short")
    assert code == 2 and "reason" in err
    code, out, err = ok("env", "withdraw", str(envs["flight Z"]), "--reason",
                        "replaced by the customer's issue C")
    assert code == 0 and "withdrawn by" in out, err
    # the default baseline lists the stale level as left out: nothing to issue
    code, out, err = ok("report", "spec", "--product", "Camera electronics", "--out",
                        str(tmp_path), "--yes")
    assert code == 2 and "LEFT OUT" in out and "withdrawn" in out
    assert "may be issued" in err
    # a preview shows it, marked on every page, without a revision number
    code, out, err = ok("report", "spec", "--product", "Camera electronics", "--out",
                        str(tmp_path / "preview"), "--preview")
    assert code == 0 and "PREVIEW - not issued" in out, err
    pdf = next((tmp_path / "preview").glob("*.pdf"))
    pages = [p.extract_text() for p in PdfReader(str(pdf)).pages]
    assert len(pages) > 1
    assert all("PREVIEW - not issued" in t for t in pages)
    assert not any(re.search(r"revision\s+\d", t) for t in pages)
    assert "STALE" in pages[0]
    assert json.loads(ok("report", "spec", "--product", "Camera electronics", "--out",
                         str(tmp_path), "--preview", "--json")[1])["preview"] is True
    # a re-derivation cannot use the withdrawn input: derive again from what remains,
    # then the default baseline issues the new number after confirmation
    code, out, err = ok("level", "rederive", str(level["id"]), "--yes")
    assert code == 2 and "withdrawn" in err
    road_rev = json.loads(ok("env", "history", str(envs["road Z"]), "--json")[1])[0]["id"]
    assert ok("level", "derive", "random Z", "--product", "Camera electronics", "--kind",
              "random", "--axis", "Z", "--revisions", str(road_rev))[0] == 0
    monkeypatch.setattr("sys.stdin", __import__("io").StringIO("y\n"))
    code, out, err = ok("report", "spec", "--product", "Camera electronics", "--out",
                        str(tmp_path / "issued"))
    assert code == 0, err
    assert "random Z #2" in out and ": issue" in out and "revision 1 (issued)" in out
    number = re.search(r"(TLS-\S+) revision 1", out).group(1)
    signers = [("eve", "prepared"), ("carl", "checked"), ("alan", "approved")]
    # the CLI acts as a stored user: the admin made by `init` adds the three signers and
    # makes them members of the program with their roles there
    for who, role in (("eve", "engineer"), ("carl", "engineer"), ("alan", "approver")):
        assert ok("user", "add", who, "--role", "viewer")[0] == 0
        code, out, err = ok("user", "grant", who, "--role", role, "--program",
                            "Ridge survey drone")
        assert code == 0, err
    monkeypatch.setenv("QUALPLAN_ACTOR", "eve")
    assert ok("report", "sign", number, "--role", "prepared")[0] == 0
    code, out, err = ok("report", "sign", number, "--role", "checked")
    assert code == 2 and "three distinct users" in err
    for who, role in signers[1:]:
        monkeypatch.setenv("QUALPLAN_ACTOR", who)
        code, out, err = ok("report", "sign", number, "--role", role)
        assert code == 0, err
    rows = json.loads(ok("report", "signoffs", number, "--json")[1])
    assert [(r["name"], r["role"]) for r in rows] == signers
    # the same revision re-rendered prints the names and times in the approval block
    code, out, err = ok("report", "spec", "--product", "Camera electronics", "--out",
                        str(tmp_path / "signed"), "--yes")
    assert code == 0 and "unchanged since" in out, err
    text = PdfReader(str(next((tmp_path / "signed").glob("*.pdf")))).pages[0].extract_text()
    for who, role in signers:
        assert re.search(rf"{role}\s+{who}\s+\d{{4}}-\d\d-\d\d \d\d:\d\d UTC\s+signed", text)
    assert "unsigned" not in text
