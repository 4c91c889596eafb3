"""One gate, one exit code: `qualplan audit` and `qualplan report audit` exit 0 only when
every requirement is verified or validly waived, 1 otherwise, 2 on bad usage; margins
by cause in the audit; `qualplan env impact` (issue 13 items 1, 3 and 7)."""

from __future__ import annotations

import json

import numpy as np
import pytest

from qualplan.cli import main
from qualplan.dynamics import psd
from qualplan.planning import margins


def run(capsys, *args: str) -> tuple[int, str, str]:
    try:
        main(list(args))
        code = 0
    except SystemExit as exc:
        code = int(exc.code or 0)
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def db(fresh_db_url, capsys):
    code, _, err = run(capsys, "init", "--db", fresh_db_url)
    assert code == 0, err
    return fresh_db_url


def _record(tmp_path, result) -> str:
    lines = np.geomspace(result["freq_hz"][0], result["freq_hz"][-1], 400)
    path = tmp_path / "achieved.csv"
    path.write_text("Hz,g2/Hz\n" + "\n".join(
        f"{f:.9g},{a:.9g}" for f, a in zip(
            lines, psd.asd_at(result["freq_hz"], result["asd_g2_hz"], lines), strict=True)))
    return str(path)


def test_passing_record_on_an_uncovering_level_keeps_both_gates_shut(db, capsys, tmp_path):
    ok = lambda *a: run(capsys, *a, "--db", db)  # noqa: E731
    ok("program", "add", "Coastal survey drone")
    ok("product", "add", "Camera electronics")
    ok("phase", "add", "road transport", "--duration-s", "3600", "--occurrences", "2")
    table = tmp_path / "road_z.csv"
    # Invented road spectrum from 10 Hz; the policy's coverage band starts at 20 Hz.
    table.write_text("frequency,ASD\n10,0.015\n40,0.015\n500,0.00015\n")
    code, _, err = ok("env", "add", "road Z", "--product", "Camera electronics", "--kind",
                      "random", "--axis", "Z", "--phase", "road transport", "--file",
                      str(table), "--units", "g^2/Hz")
    assert code == 0, err
    code, out, err = ok("level", "derive", "random Z", "--product", "Camera electronics",
                        "--kind", "random", "--axis", "Z", "--revisions", "1", "--json")
    assert code == 0, err
    level = json.loads(out)
    # derive/show print the verdicts in the words of the PDF (margins.verdict_words, the
    # filter the specification template uses)
    code, shown, _ = ok("level", "show", str(level["id"]))
    words = margins.verdict_words(level["result"]["verdicts"])
    assert "verdicts: " + "; ".join(words) in shown
    assert "FDS b = 4: does NOT cover the life" in words
    code, _, err = ok("req", "add", "ENV-1", "--text", "Random Z qualification", "--product",
                      "Camera electronics", "--method", "test", "--level", str(level["id"]))
    assert code == 0, err
    code, out, err = ok("evidence", "test", "ENV-1", "--file", _record(tmp_path, level["result"]),
                        "--units", "g^2/Hz", "--duration-s", "121")
    assert code == 0 and "pass" in out, out + err

    code, out, _ = ok("audit", "--json")
    assert code == 1
    (item,) = json.loads(out)["items"]
    assert item["status"] == "open"
    assert item["reason"].startswith("level does not cover the life: FDS -")
    assert item["margins"]["tolerance"] == "pass"
    assert item["margins"]["covers_life"] is False

    code, out, _ = ok("audit")
    assert code == 1
    for header in margins.COLUMNS:
        assert header in out
    assert "NOT READY: 1 of 1 requirements block release" in out

    code, out, err = ok("report", "audit", "--out", str(tmp_path / "docs"))
    assert code == 1, err
    assert "NOT READY" in out
    csv_text = next((tmp_path / "docs").glob("*.csv")).read_text()
    assert "time compression [dB, not a margin]" in csv_text
    assert "level does not cover the life" in csv_text

    code, _, err = ok("report", "audit", "--program", "no such program")
    assert code == 2 and err.startswith("error:")


def test_report_audit_passes_the_gate_when_every_requirement_is_verified(db, capsys, tmp_path):
    ok = lambda *a: run(capsys, *a, "--db", db)  # noqa: E731
    ok("program", "add", "P")
    ok("product", "add", "U")
    code, _, err = ok("req", "add", "STR-1", "--text", "Bracket stress", "--product", "U",
                      "--method", "analysis")
    assert code == 0, err
    code, out, err = ok("evidence", "analysis", "STR-1", "--applied", "180", "--allowable",
                        "276", "--units", "MPa", "--factor-of-safety", "1.25")
    assert code == 0, out + err
    code, out, err = ok("report", "audit", "--out", str(tmp_path / "docs"))
    assert code == 0, out + err
    assert "READY FOR RELEASE" in out
    code, out, _ = ok("audit")
    assert code == 0
    # MS = 276 / (1.25 x 180) - 1 = +0.227 (closed form), unitless, in its own column
    assert "+0.227" in out


def test_env_impact_lists_levels_requirements_and_documents(db, capsys, tmp_path):
    ok = lambda *a: run(capsys, *a, "--db", db)  # noqa: E731
    ok("program", "add", "P")
    ok("product", "add", "U")
    ok("phase", "add", "road", "--duration-s", "60", "--occurrences", "1")
    table = tmp_path / "z.csv"
    table.write_text("frequency,ASD\n20,0.01\n2000,0.01\n")
    ok("env", "add", "road Z", "--product", "U", "--kind", "random", "--axis", "Z",
       "--phase", "road", "--file", str(table), "--units", "g^2/Hz")
    code, out, err = ok("level", "derive", "random Z", "--product", "U", "--kind", "random",
                        "--axis", "Z", "--revisions", "1", "--grade", "acceptance", "--json")
    assert code == 0, err
    level_id = json.loads(out)["id"]
    ok("req", "add", "ENV-1", "--text", "Random Z", "--product", "U", "--method", "test",
       "--level", str(level_id))
    code, out, err = ok("env", "impact", "1")
    assert code == 0, err
    assert "random Z #1" in out and "would become stale" in out and "ENV-1" in out
    code, out, _ = ok("env", "impact", "1", "--json")
    data = json.loads(out)
    assert [x["key"] for x in data["requirements"]] == ["ENV-1"]
    assert data["levels"][0]["through"] == "input"
    code, _, err = ok("env", "impact", "99")
    assert code == 2 and "environment 99 not found" in err
