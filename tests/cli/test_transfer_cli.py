"""``qualplan transfer`` and ``env list --product``: environments down the product tree."""

from __future__ import annotations

import json

import pytest

from qualplan.cli import main


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


def test_mount_rule_derive_list_and_force_limit(db, capsys):
    ok = lambda *a: run(capsys, *a, "--db", db)  # noqa: E731
    assert ok("program", "add", "Drone")[0] == 0
    assert ok("product", "add", "Sensor pod", "--mass-kg", "45")[0] == 0
    assert ok("product", "add", "Pod computer", "--parent", "Sensor pod", "--mass-kg", "8")[0] == 0
    for ax in "XYZ":
        code, _, err = ok("env", "add", f"road {ax}", "--product", "Sensor pod", "--kind",
                          "random", "--axis", ax, "--data",
                          '{"freq_hz": [20, 2000], "asd_g2_hz": [0.04, 0.04]}')
        assert code == 0, err
    code, out, err = ok("transfer", "mount", "--product", "Pod computer", "--axes",
                        "X=-Z,Y=X,Z=-Y")
    assert code == 0, err
    assert "X = parent -Z" in out
    code, out, err = ok("transfer", "rule-add", "shelf zone", "--kind", "zone_transmissibility",
                        "--data", '{"freq_hz": [20, 200, 2000], "gain": [1, 4, 1]}',
                        "--basis", "test")
    assert code == 0, err
    code, out, err = ok("transfer", "derive", "road X shelf", "--product", "Pod computer",
                        "--axis", "X", "--from", "3", "--rules", "1")
    assert code == 0, err
    code, out, err = ok("env", "list", "--product", "Pod computer", "--json")
    rows = {r["name"]: r for r in json.loads(out)}
    assert rows["road X shelf"]["origin"] == "transferred"
    assert rows["road Z"]["origin"] == "replaced"
    assert rows["road Y"]["origin"] == "inherited"
    code, out, err = ok("env", "revise", "3", "--note", "new survey", "--data",
                        '{"freq_hz": [20, 2000], "asd_g2_hz": [0.05, 0.05]}')
    assert code == 0, err
    code, out, err = ok("env", "list", "--product", "Pod computer")
    assert "stale: parent environment 'road Z' has revision 2" in out
    code, out, err = ok("transfer", "force-limit", "--environment", "4", "--mass-kg", "8",
                        "--c2", "2", "--f0-hz", "120", "--modes", "120:5:10,400:2:15",
                        "--residual-kg", "1", "--max-notch-db", "10", "--json")
    assert code == 0, err
    fl = json.loads(out)
    # below f0 at 20 Hz the ASD is 0.04 (|T| = 1): C^2 M0^2 S g0^2 = 2 x 64 x 0.04 x 96.17
    assert fl["fsd_n2_hz"][0] == pytest.approx(2 * 64 * 0.04 * 9.80665 ** 2)
    assert fl["needs_acceptance"] is True


def test_refusals_are_one_line_exit_2(db, capsys):
    ok = lambda *a: run(capsys, *a, "--db", db)  # noqa: E731
    ok("program", "add", "Drone")
    ok("product", "add", "Pod")
    ok("product", "add", "Unit", "--parent", "Pod")
    code, _, err = ok("transfer", "mount", "--product", "Unit", "--axes", "X=X,Y=Y,Z=-Z")
    assert code == 2 and "determinant +1" in err and len(err.strip().splitlines()) == 1
    code, _, err = ok("transfer", "mount", "--product", "Unit", "--axes", "X:Y")
    assert code == 2 and "CHILD=PARENT" in err
    code, _, err = ok("transfer", "rule-add", "z", "--kind", "mass_attenuation", "--data",
                      '{"method": "guess"}', "--basis", "test")
    assert code == 2 and "spec.method" in err
    code, _, err = ok("transfer", "force-limit", "--environment", "1", "--mass-kg", "-1",
                      "--c2", "2", "--f0-hz", "100")
    assert code == 2 and "mass_kg=-1.0" in err and len(err.strip().splitlines()) == 1
