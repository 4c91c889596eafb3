"""``qualplan transfer notch`` and ``accept-notching``: a sine test level notched against a
response limit through a survey transmissibility read from a CSV file."""

from __future__ import annotations

import json
import math

from tests.cli.test_transfer_cli import run


def test_notch_a_sine_level_from_a_survey_file(fresh_db_url, capsys, tmp_path):
    db = fresh_db_url
    ok = lambda *a: run(capsys, *a, "--db", db)  # noqa: E731
    assert ok("init")[0] == 0
    assert ok("program", "add", "Drone")[0] == 0
    assert ok("product", "add", "Pod computer", "--mass-kg", "8")[0] == 0
    code, out, err = ok("env", "add", "engine tones", "--product", "Pod computer", "--kind",
                        "sine", "--axis", "X", "--data",
                        '{"bands": [{"f_lo_hz": 10, "f_hi_hz": 200, "quantity": "acceleration",'
                        ' "amplitude": 1.0}], "sweep": {"rate_oct_per_min": 2, "sweeps": 1}}')
    assert code == 0, err
    code, out, err = ok("env", "history", "1", "--json")
    rev = json.loads(out)[0]["id"]
    code, out, err = ok("level", "derive", "sine X", "--product", "Pod computer", "--kind",
                        "sine", "--axis", "X", "--revisions", str(rev), "--json")
    assert code == 0, err
    level = json.loads(out)
    amp = max(level["result"]["accel_g"])
    survey = tmp_path / "survey.csv"
    survey.write_text("frequency [Hz],|T| [g/g]\n5,1\n100,1.5\n150,10\n250,1\n")
    code, out, err = ok("transfer", "notch", "--level", str(level["id"]), "--location",
                        "monitor A3", "--source", "survey", "--limit", "5",
                        "--transmissibility-file", str(survey), "--max-notch-db", "3", "--json")
    assert code == 0, err
    got = json.loads(out)
    (notch,) = got["notches"]
    # at the survey's peak (150 Hz, |T| = 10): 20 log10(10 x amp / 5) dB (closed form)
    assert notch["f_deepest_hz"] == 150.0
    assert abs(notch["depth_db"] - 20 * math.log10(10 * amp / 5)) < 1e-9
    assert got["transmissibility_source"] == "low-level survey"
    code, out, err = ok("transfer", "accept-notching", "--level", str(level["id"]),
                        "--rationale", "monitor on a bracket resonance")
    assert code == 0, err
    assert "accepted by" in out
    # bad input: one line, exit 2, nothing stored
    survey.write_text("frequency,gain\n5,1\n100,abc\n")
    code, out, err = ok("transfer", "notch", "--level", str(level["id"]), "--location", "m",
                        "--source", "analysis", "--limit", "5", "--transmissibility-file",
                        str(survey))
    assert code == 2 and "line 3" in err and "abc" in err
