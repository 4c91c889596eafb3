"""The analysis loads package: content, solver settings, PDF/CSV/JSON, revisions."""

from __future__ import annotations

import csv
import io
import json
import math
import re

import numpy as np
import pytest
from pypdf import PdfReader

from qualplan.planning import catalog, documents, environments, levels, loads, policies
from qualplan.planning import modal as pm
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.planning.errors import ValidationFailed
from qualplan.reports.loads import LoadsRenderer
from qualplan.store import models as m

MODES = (b"mode,fn_hz,zeta,meff_x_kg,meff_y_kg,meff_z_kg\n"
         b"1,180,0.03,0.1,0.2,1.5\n2,240,0.05,0.05,0.9,0.4\n3,610,0.05,0.6,0.1,0.2\n")


@pytest.fixture
def unit_levels(session):
    eng = Actor("eve", m.Role.engineer)
    prog = catalog.create_program(session, eng, s.ProgramCreate(name="Loads glider"))
    policies.ensure_default_policies(session, eng)
    unit = catalog.create_product(session, eng, s.ProductCreate(
        program_id=prog.id, name="Radio unit", part_number="LG-RU-1", mass_kg=2.4))
    road = catalog.create_phase(session, eng, s.PhaseCreate(
        program_id=prog.id, name="road", duration_s=3600.0, occurrences=2))
    gevs = policies.policy_ref(session, "spaceflight-gevs")

    def level(name, kind, data):
        env = environments.create_environment(session, eng, s.EnvironmentCreate(
            product_id=unit.id, phase_id=road.id, name=name, kind=kind, axis=m.Axis.Z,
            data=data))
        return levels.derive_level(session, eng, s.LevelRecipe(
            product_id=unit.id, name=f"{name} analysis", purpose=m.LevelPurpose.analysis,
            kind=kind.value, axis=m.Axis.Z, revision_ids=[env.revisions[-1].id],
            policy_id=gevs.id))

    lv = [
        level("shock Z", m.EnvironmentKind.shock,
              {"freq_hz": [100.0, 1000.0, 2000.0], "accel_g": [10.0, 100.0, 100.0], "q": 10.0}),
        level("random Z", m.EnvironmentKind.random,
              {"freq_hz": [20.0, 80.0, 350.0, 2000.0], "asd_g2_hz": [0.01, 0.04, 0.04, 0.007]}),
        level("sine Z", m.EnvironmentKind.sine, {
            "bands": [{"f_lo_hz": 5.0, "f_hi_hz": 500.0, "quantity": "acceleration",
                       "amplitude": 1.0}],
            "sweep": {"rate_oct_per_min": 2.0, "direction": "up", "sweeps": 1}}),
    ]
    return eng, unit, lv


def test_half_power_cycles_and_points_per_octave_closed_forms():
    # log sweep: cycles in fn/Q at 2 oct/min, fn 100 Hz, Q 10: 60 x 100 / (10 x 2 x ln 2)
    # = 432.8 (closed form, the sweep check value of the project)
    assert loads._half_power_cycles(100.0, 0.05, 2.0) == pytest.approx(432.8, abs=0.05)
    # >= 5 points per fn/Q: ratio 1 + 1/(5Q); Q = 10: ln 2 / ln 1.02 = 35.003 -> 36 per octave
    assert loads._points_per_octave(10.0) == 36


def test_loads_content_sections_settings_and_revisions(session, unit_levels, tmp_path):
    eng, unit, lv = unit_levels
    with pytest.raises(ValidationFailed, match="no analysis level on axis X"):
        loads.loads_content(session, unit.id, axis=m.Axis.X)
    content = loads.loads_content(session, unit.id)
    assert [x.kind for x in content.sections] == ["random", "sine", "shock", "transient"]
    assert content.modal is None and any("no modal summary" in w for w in content.warnings)
    rnd, sine, shock, _ = content.sections
    assert rnd.keys == ["freq_hz", "asd_g2_hz"]
    facts = {f.label: f.value for f in rnd.facts}
    assert "g rms" in facts["overall"] and facts["analysis margin"].startswith("+")
    # sine displacement column: a g0 / (2 pi f)^2 (closed form), mm peak
    f, a, d = sine.rows[0]
    assert d == pytest.approx(a * 9.80665 / (2 * math.pi * f) ** 2 * 1e3, rel=1e-12)
    shock_settings = {x.setting: x for x in shock.settings}
    assert shock_settings["modal damping"].value.startswith("Q = 10 (zeta = 0.05)")
    # no modal summary: 1.5 x 2000 Hz; dt <= 1/(10 x 3000 Hz)
    assert shock_settings["frequency range"].value.endswith("to 3000 Hz")
    assert "dt <= 3.33e-05 s" in shock_settings["transient time step and end time"].value

    issued = documents.issue_document(session, eng, content, LoadsRenderer(), tmp_path)
    assert issued.revision == 1 and issued.number == "ALP-LG-RU-1"
    pdf = next(p for p in issued.files if p.suffix == ".pdf")
    text = re.sub(r"\s+", " ", "\n".join(pg.extract_text() or "" for pg in
                                          PdfReader(str(pdf)).pages))
    for phrase in ("Analysis loads package", "Recommended solver settings", "responsible engineer",
                   "maximax absolute acceleration", "modes to retain"):
        assert phrase in text
    table = next(p for p in issued.files if p.name.endswith("-Z-random-random-z-analysis.csv"))
    body = table.read_text()
    assert "# solver setting, frequency points" in body
    rows = list(csv.reader(io.StringIO("".join(x for x in body.splitlines(True)
                                               if not x.startswith("#")))))
    assert rows[0] == ["freq_hz", "asd_g2_hz"] and float(rows[1][0]) == rnd.rows[0][0]
    data = json.loads(next(p for p in issued.files if p.suffix == ".json").read_text())
    assert data["content_hash"] == issued.content_hash

    again = documents.issue_document(session, eng, loads.loads_content(session, unit.id),
                                     LoadsRenderer(), tmp_path)
    assert again.revision == 1 and not again.new_revision
    pm.import_modal_summary(session, eng, unit.id, "FEM A", "modes.csv", MODES)
    content = loads.loads_content(session, unit.id, note="modal summary added")
    assert content.revision == 2 and content.modal.modes == 3
    rnd = content.sections[0]
    pts = {x.setting: x for x in rnd.settings}["frequency points"]
    # lightest damping of the summary zeta 0.03 (Q 16.7): ln 2 / ln(1 + 0.06/5) = 58.1 -> 59
    assert pts.value.startswith(">= 59 per octave")
    assert "modal summary holds 87.5 % on Z" in {x.setting: x for x in rnd.settings}[
        "modes to retain"].basis  # 2.1 of 2.4 kg
    sine = content.sections[1]
    cyc = {f.label: f.value for f in sine.facts}
    key = next(k for k in cyc if k.startswith("cycles in the half-power band"))
    # 60 x 180 x 0.06 / (2 ln 2) = 467 cycles at the first mode
    assert cyc[key].startswith("180 Hz: 467")


def _maximax_srs_scipy(t_s, accel_g, fn_hz, q):
    """Maximax absolute-acceleration SRS by scipy.signal.lsim of the base-excited SDOF
    H(s) = (2 zeta wn s + wn^2) / (s^2 + 2 zeta wn s + wn^2) (Smallwood 1981's model,
    integrated by scipy, not by qualplan), with free decay after the record."""
    from scipy import signal

    dt = t_s[1] - t_s[0]
    tail = int(round(5.0 / (fn_hz * dt)))
    x = np.concatenate([accel_g, np.zeros(tail)])
    t = np.arange(x.size) * dt
    wn, zeta = 2 * math.pi * fn_hz, 0.5 / q
    _, y, _ = signal.lsim(([2 * zeta * wn, wn ** 2], [1.0, 2 * zeta * wn, wn ** 2]), x, t,
                          interp=True)
    return float(np.max(np.abs(y)))


def test_transient_section_history_sample_rate_settings_and_its_srs(session, unit_levels,
                                                                   tmp_path):
    eng, unit, lv = unit_levels
    content = loads.loads_content(session, unit.id)
    tr = next(x for x in content.sections if x.kind == "transient")
    shock = next(x for x in content.sections if x.kind == "shock")
    assert tr.keys == ["time_s", "accel_g"] and tr.level_id == shock.level_id
    t = np.array([r[0] for r in tr.rows])
    a = np.array([r[1] for r in tr.rows])
    facts = {f.label: f.value for f in tr.facts}
    dt = float(np.median(np.diff(t)))
    # the sample rate printed is the reciprocal of the table's time step
    assert facts["sample rate"].startswith(f"{1 / dt:.6g} Hz")
    assert a[0] == 0.0 and "converged" in facts["SRS match"]
    # SRS of the printed history, computed independently with scipy.signal.lsim, within
    # the synthesis tolerance (+/-1.5 dB) of the level's SRS (log-log between breakpoints)
    f_bp, srs_bp = np.array([r[0] for r in shock.rows]), np.array([r[1] for r in shock.rows])
    for fn in (150.0, 500.0, 1200.0):
        want = float(np.exp(np.interp(np.log(fn), np.log(f_bp), np.log(srs_bp))))
        got = _maximax_srs_scipy(t, a, fn, 10.0)
        assert abs(20 * math.log10(got / want)) <= 1.5 + 0.1, (fn, got, want)
    st = {x.setting: x.value for x in tr.settings}
    # common-practice rules by hand: dt <= 1/(10 x 1.5 x 2000 Hz) = 3.33e-5 s; the end time is
    # the length plus max(3/f_low, 3 x length) to max(5/f_low, 5 x length), f_low = 100 Hz
    length = t[-1]
    assert st["time step"].startswith(f"dt <= {min(dt, 1 / 30000):.3g} s")
    assert st["end time"].startswith(f"{length + max(0.03, 3 * length):.3g} to "
                                     f"{length + max(0.05, 5 * length):.3g} s")
    issued = documents.issue_document(session, eng, content, LoadsRenderer(), tmp_path)
    path = next(p for p in issued.files if p.name.endswith("-Z-transient-shock-z-analysis.csv"))
    body = path.read_text()
    assert "# sample rate:" in body and "# solver setting, end time:" in body
    rows = list(csv.reader(io.StringIO("".join(x for x in body.splitlines(True)
                                               if not x.startswith("#")))))
    assert rows[0] == ["time_s", "accel_g"] and len(rows) - 1 == len(tr.rows)
    text = re.sub(r"\s+", " ", "\n".join(pg.extract_text() or "" for pg in
                                          PdfReader(str(next(p for p in issued.files
                                                             if p.suffix == ".pdf"))).pages))
    assert "Z transient: shock Z analysis" in text and "samples; the whole history" in text


def test_transient_section_of_a_level_from_a_measured_record(session, unit_levels):
    eng, unit, _ = unit_levels
    dt = 1 / 10240
    t = np.arange(2048) * dt
    # an invented half-sine drop record, 20 g for 6 ms
    x = np.where(t < 0.006, 20.0 * np.sin(math.pi * t / 0.006), 0.0)
    env = environments.create_environment(session, eng, s.EnvironmentCreate(
        product_id=unit.id, name="drop record", kind=m.EnvironmentKind.time_history,
        axis=m.Axis.Y, data={"dt_s": dt, "accel_g": x.tolist()}))
    gevs = policies.policy_ref(session, "spaceflight-gevs")
    lv = levels.derive_level(session, eng, s.LevelRecipe(
        product_id=unit.id, name="drop analysis", purpose=m.LevelPurpose.analysis,
        kind="shock", axis=m.Axis.Y, revision_ids=[env.revisions[-1].id], policy_id=gevs.id))
    content = loads.loads_content(session, unit.id, axis=m.Axis.Y)
    trs = [x for x in content.sections if x.kind == "transient"]
    assert [tr.facts[0].value for tr in trs] == [
        "synthesised to the level's SRS", "measured: drop record revision 1"]
    measured = trs[1]
    margin = pm.level_curve(lv).margin_db or 0.0
    factor = 10 ** (margin / 20)
    # the measured record times the level's analysis margin, 6 significant figures
    assert [r[1] for r in measured.rows] == pytest.approx((x * factor).tolist(), rel=1e-5,
                                                          abs=1e-9)
    assert {f.label: f.value for f in measured.facts}["sample rate"].startswith("10240 Hz")
