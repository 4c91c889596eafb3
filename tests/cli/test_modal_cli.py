"""``qualplan modal``: import a modal summary, estimate, record evidence, errors in one line."""

from __future__ import annotations

import json

import pytest

from qualplan.cli import main

MODES = """# invented modal summary
mode,fn_hz,q,meff_x_kg,meff_y_kg,meff_z_kg
1,180,16.7,0.1,0.2,1.5
2,240,10,0.05,0.9,0.4
3,610,10,0.6,0.1,0.2
"""


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


def test_modal_import_estimate_and_evidence(db, capsys, tmp_path):
    ok = lambda *a: run(capsys, *a, "--db", db)  # noqa: E731
    assert ok("program", "add", "Coastal survey drone")[0] == 0
    assert ok("product", "add", "Camera electronics", "--mass-kg", "2.4")[0] == 0
    assert ok("phase", "add", "landing", "--duration-s", "1", "--occurrences", "10")[0] == 0
    srs = tmp_path / "landing.csv"
    srs.write_text("Hz,g\n100,10\n1000,100\n2000,100\n")
    code, _, err = ok("env", "add", "landing Z", "--product", "Camera electronics", "--kind",
                      "shock", "--axis", "Z", "--phase", "landing", "--file", str(srs),
                      "--units", "g")
    assert code == 0, err
    rev = json.loads(ok("env", "history", "1", "--json")[1])[0]["id"]
    code, out, err = ok("level", "derive", "shock Z analysis", "--product", "Camera electronics",
                        "--kind", "shock", "--axis", "Z", "--revisions", str(rev), "--purpose",
                        "analysis", "--json")
    assert code == 0, err
    level = json.loads(out)["id"]
    modes = tmp_path / "modes.csv"
    modes.write_text(MODES)
    code, out, err = ok("modal", "import", str(modes), "--product", "Camera electronics",
                        "--name", "FEM A")
    assert code == 0, err
    assert "revision 1: 3 modes" in out
    code, out, err = ok("modal", "show", "FEM A")
    assert code == 0, err
    assert "sum of effective masses on Z: 2.1 kg" in out
    code, out, err = ok("modal", "estimate", "FEM A", "--level", str(level), "--json")
    assert code == 0, err
    est = json.loads(out)
    q = est["result"]["quantities"]
    assert q["base_force_srss_n"]["value"] < q["base_force_cqc_n"]["value"]
    code, out, err = ok("modal", "estimate-show", str(est["id"]))
    assert code == 0 and "base_force_cqc_n" in out and "N peak" in out
    assert ok("req", "add", "STR-1", "--text", "Feet carry the landing shock", "--product",
              "Camera electronics", "--method", "analysis", "--level", str(level))[0] == 0
    allowable = 1.5 * q["base_force_cqc_n"]["value"]
    code, out, err = ok("modal", "evidence", "STR-1", "--estimate", str(est["id"]), "--quantity",
                        "base_force_cqc_n", "--allowable", f"{allowable:.6f}",
                        "--factor-of-safety", "1.25")
    assert code == 0, err
    assert "pass" in out and "MS = " in out  # 1.5 / 1.25 - 1 = +0.200
    assert "+0.200" in out
    # bad input: one line, exit 2
    bad = tmp_path / "bad.csv"
    bad.write_text("fn_hz,zeta,meff_z_kg\n100,1.5,1\n")
    code, out, err = ok("modal", "import", str(bad), "--product", "Camera electronics",
                        "--name", "bad")
    assert code == 2 and "zeta" in err and len(err.strip().splitlines()) == 1
    code, _, err = ok("modal", "evidence", "STR-1", "--estimate", str(est["id"]), "--quantity",
                      "stress", "--allowable", "1")
    assert code == 2 and "quantity" in err
    # the loads package of the analysis level, issued twice: the same revision
    out_dir = tmp_path / "docs"
    code, out, err = ok("report", "loads", "--product", "Camera electronics", "--axis", "Z",
                        "--out", str(out_dir))
    assert code == 0, err
    assert "revision 1 (issued)" in out
    assert (out_dir / "ALP-CAMERA-ELECTRONICS-Z-r1.pdf").is_file()
    code, out, err = ok("report", "loads", "--product", "Camera electronics", "--axis", "Z",
                        "--out", str(out_dir))
    assert code == 0 and "unchanged since" in out
    code, out, err = ok("report", "loads", "--product", "Camera electronics", "--axis", "X",
                        "--out", str(out_dir))
    assert code == 2 and "no analysis level on axis X" in err
    # Steinberg's check needs a random estimate: one line, exit 2, for the shock estimate
    code, _, err = ok("modal", "steinberg", "--estimate", str(est["id"]), "--mode", "1",
                      "--board-edge-mm", "150", "--component-length-mm", "25",
                      "--board-thickness-mm", "1.6")
    assert code == 2 and "random estimate" in err
