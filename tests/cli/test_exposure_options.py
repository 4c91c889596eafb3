"""``qualplan env add/revise --share/--duration-s/--count``: the exposure of an
environment read from a file, stated on the command line, stored with the data and used
by the life cycle (docs/methods/exposure.md; life from phase durations after MIL-STD-810H
Part One Annex A). Refusals name the field and the value and store nothing."""

from __future__ import annotations

import numpy as np

from tests.cli.test_transfer_cli import run


def _setup(capsys, db):
    ok = lambda *a: run(capsys, *a, "--db", db)  # noqa: E731
    assert ok("init")[0] == 0
    assert ok("program", "add", "Yard cranes")[0] == 0
    assert ok("product", "add", "Hoist drive", "--mass-kg", "12")[0] == 0
    assert ok("phase", "add", "coupling", "--duration-s", "2", "--occurrences", "50")[0] == 0
    return ok


def test_a_record_once_per_occurrence(fresh_db_url, capsys, tmp_path):
    ok = _setup(capsys, fresh_db_url)
    # an impact record of 0.12 s with a time column, in m/s^2 (invented)
    t = np.arange(1536) / 12_800.0
    a = np.where((t > 0.01) & (t < 0.016), 25 * 9.80665 * np.sin(np.pi * (t - 0.01) / 0.006),
                 0.0)
    path = tmp_path / "impact.csv"
    np.savetxt(path, np.column_stack([t, a]), delimiter=",", header="time_s,accel_m_s2",
               comments="")
    code, out, err = ok("env", "add", "impact", "--product", "Hoist drive", "--kind",
                        "time_history", "--axis", "X", "--phase", "coupling", "--file",
                        str(path), "--units", "m/s^2", "--duration-s", "0.12")
    assert code == 0, err
    assert "peak 25 g" in out  # 25 g x 9.80665 m/s^2 read back in g
    # a spectrum filling the phase beside it: 0.12/2 + 1 = 1.06 times (hand sum)
    code, out, err = ok("env", "add", "rattle", "--product", "Hoist drive", "--kind", "random",
                        "--axis", "X", "--phase", "coupling", "--data",
                        '{"freq_hz": [20, 2000], "asd_g2_hz": [0.001, 0.001]}')
    assert code == 0, err
    assert "together fill 1.06 times the phase's time" in err
    assert "impact r1 (time history, axis X, share 0.06)" in err
    # a share beside --data is merged; the same field given twice must agree
    code, out, err = ok("env", "add", "rattle 2", "--product", "Hoist drive", "--kind",
                        "random", "--axis", "X", "--phase", "coupling", "--data",
                        '{"freq_hz": [20, 2000], "asd_g2_hz": [0.001, 0.001], "share": 0.5}',
                        "--share", "0.25")
    assert code != 0 and "share=0.25" in err and "share = 0.5" in err
    code, out, err = ok("env", "add", "impact 2", "--product", "Hoist drive", "--kind",
                        "time_history", "--axis", "X", "--phase", "coupling", "--file",
                        str(path), "--units", "m/s^2", "--share", "1.5")
    assert code != 0 and "data.share=1.5" in err
    code, out, _ = ok("env", "list")
    assert "rattle 2" not in out and "impact 2" not in out  # nothing half-written


def test_revise_with_a_share(fresh_db_url, capsys, tmp_path):
    ok = _setup(capsys, fresh_db_url)
    path = tmp_path / "psd.csv"
    path.write_text("freq_hz,asd_g2_hz\n20,0.002\n2000,0.002\n")
    assert ok("env", "add", "rattle", "--product", "Hoist drive", "--kind", "random",
              "--axis", "Y", "--phase", "coupling", "--file", str(path), "--units",
              "g^2/Hz")[0] == 0
    code, out, err = ok("env", "revise", "1", "--note", "a quarter of the coupling",
                        "--file", str(path), "--units", "g^2/Hz", "--share", "0.25")
    assert code == 0, err
    code, out, err = ok("env", "history", "1", "--json")
    assert code == 0, err
    assert '"share": 0.25' in out
