"""The work commands as a script would run them: a story from environments to the
audit gate, with the gate's exit code and JSON."""

from __future__ import annotations

import json

import numpy as np
import pytest

from qualplan.cli import main
from qualplan.dynamics import psd


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


def test_story_from_csv_to_audit_gate(db, capsys, tmp_path):
    ok = lambda *a: run(capsys, *a, "--db", db)  # noqa: E731
    assert ok("program", "add", "Coastal survey drone")[0] == 0
    assert ok("product", "add", "Camera electronics", "--mass-kg", "2.4")[0] == 0
    code, _, err = ok("phase", "add", "road transport", "--duration-s", "3600",
                      "--occurrences", "2")
    assert code == 0, err
    table = tmp_path / "road_z.csv"
    table.write_text("frequency,ASD\n10,0.015\n40,0.015\n500,0.00015\n")
    code, out, err = ok("env", "add", "road Z", "--product", "Camera electronics", "--kind",
                        "random", "--axis", "Z", "--phase", "road transport", "--file", str(table),
                        "--units", "g^2/Hz")
    assert code == 0, err
    # MIL-STD-810H Method 514.8 Annex C, US highway truck vertical: printed 1.04 g rms
    # (MIL-STD-810H 514.8 Annex C; recomputed 1.0429 g rms).
    assert "overall 1.043 g rms" in out
    code, out, err = ok("env", "list", "--json")
    rev_id = json.loads(out)[0]["id"]
    code, out, err = ok("env", "history", str(rev_id), "--json")
    revision_id = json.loads(out)[0]["id"]
    # An acceptance level (a workmanship screen: its coverage of the life is not asked;
    # a qualification level that does not cover the life keeps the gate shut, see
    # tests/cli/test_gate_cli.py).
    code, out, err = ok("level", "derive", "random Z", "--product", "Camera electronics",
                        "--kind", "random", "--axis", "Z", "--revisions", str(revision_id),
                        "--grade", "acceptance", "--json")
    assert code == 0, err
    level = json.loads(out)
    # GEVS acceptance: 1 min per axis (GSFC-STD-7000B Table 2.4-1, from memory)
    assert level["result"]["duration_s"] == 60.0
    assert ok("req", "add", "ENV-1", "--text", "Random Z acceptance", "--product",
              "Camera electronics", "--method", "test", "--level", str(level["id"]))[0] == 0

    code, out, _ = ok("audit", "--json")
    assert code == 1
    report = json.loads(out)
    assert [(i["key"], i["status"]) for i in report["items"]] == [("ENV-1", "open")]

    r = level["result"]
    lines = np.geomspace(r["freq_hz"][0], r["freq_hz"][-1], 400)
    record = tmp_path / "achieved.csv"
    record.write_text("Hz,g2/Hz\n" + "\n".join(
        f"{f:.9g},{a:.9g}" for f, a in zip(lines, psd.asd_at(r["freq_hz"], r["asd_g2_hz"], lines),
                                       strict=True)))
    code, out, err = ok("evidence", "test", "ENV-1", "--file", str(record), "--units", "g^2/Hz",
                        "--duration-s", "121")
    assert code == 0 and "pass" in out, out + err
    code, out, _ = ok("audit", "--json", "--product", "Camera electronics")
    assert code == 0
    assert json.loads(out)["release_ready"] is True
    # every change left an event, newest first
    code, out, _ = ok("events", "--entity", "requirement", "--json")
    actions = [e["action"] for e in json.loads(out)["items"]]
    assert actions == ["add-evidence", "create"]


def test_bad_inputs_are_one_line_errors_and_store_nothing(db, capsys, tmp_path):
    ok = lambda *a: run(capsys, *a, "--db", db)  # noqa: E731
    ok("program", "add", "P")
    ok("product", "add", "U")
    bad = tmp_path / "bad.csv"
    bad.write_text("10,0.01\n10,0.02\n")
    code, _, err = ok("env", "add", "dup", "--product", "U", "--kind", "random", "--axis", "X",
                      "--file", str(bad), "--units", "g^2/Hz")
    assert code == 2 and err.startswith("error: data.freq_hz[1]=10.0") and "increasing" in err
    code, _, err = ok("env", "add", "nounits", "--product", "U", "--kind", "random", "--axis",
                      "X", "--file", str(bad))
    assert code == 2 and "value_units" in err
    code, _, err = ok("env", "add", "wrongunits", "--product", "U", "--kind", "random",
                      "--axis", "X", "--file", str(bad), "--units", "g")
    assert code == 2 and "not a unit for random data" in err
    code, out, _ = ok("env", "list", "--json")
    assert json.loads(out) == []
    code, _, err = ok("level", "show", "999")
    assert code == 2 and "level 999 not found" in err
