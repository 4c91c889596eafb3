"""Exposure bookkeeping and honest level derivation (issue 12).

Each defect of the issue has a test here that failed before the change:
1 runs counted once (test_runs_*), 2 per-input compression, 3 non-converged FDS
equivalent refused and records analysed to their band, 4 sine among FDS-equivalent
inputs, 5 exposure longer than the phase refused, 6 record analysis resolves the band's
lower edge, 7 exact SDOF load factor with Miles beside.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.special import gamma

from qualplan.dynamics import fatigue, psd
from qualplan.planning import catalog, environments, levels, policies
from qualplan.planning import schemas as s
from qualplan.planning.errors import ValidationFailed
from qualplan.planning.lifecycle import LifeItem, exposure, exposure_s
from qualplan.store import models as m

K = m.EnvironmentKind


def _phase(session, actor, program, name, duration_s, occurrences=1):
    return catalog.create_phase(session, actor, s.PhaseCreate(
        program_id=program.id, name=name, duration_s=duration_s, occurrences=occurrences))


def _env(session, actor, unit, phase, name, kind, data, axis=m.Axis.Z):
    return environments.create_environment(session, actor, s.EnvironmentCreate(
        product_id=unit.id, phase_id=phase.id, name=name, kind=kind, axis=axis, data=data))


def _rev(env):
    return env.revisions[-1]


def _derive(session, actor, unit, revs, policy="military-810h", **kw):
    pol = policies.policy_ref(session, policy)
    return levels.derive_level(session, actor, s.LevelRecipe(
        product_id=unit.id, name=kw.pop("name", "level Z"), kind=kw.pop("kind", "random"),
        axis=m.Axis.Z, revision_ids=[r.id for r in revs], policy_id=pol.id, **kw))


def _sine(rate=2.0, sweeps=1, lo=20.0, hi=500.0, g=0.5):
    return {"bands": [{"f_lo_hz": lo, "f_hi_hz": hi, "quantity": "acceleration",
                       "amplitude": g, "unit": "g"}],
            "sweep": {"rate_oct_per_min": rate, "direction": "up", "sweeps": sweeps}}


def _policy_with(session, actor, name, **changes):
    """A copy of the GEVS policy with sections replaced (e.g. equivalence, control)."""
    src = policies.policy_ref(session, "spaceflight-gevs")
    row = policies.copy_policy(session, actor, src.id, s.PolicyCopy(name=name))
    rules = policies.rules_of(row).model_copy(update=changes)
    return policies.update_policy(session, actor, row.id, s.PolicyUpdate(rules=rules), None)


# --- exposure model ---------------------------------------------------------------------


def test_exposure_sums_of_a_small_life_cycle_by_hand(session, engineer, program, unit):
    """Hand sums (rule of docs/methods/exposure.md): road 1 h x 2 occurrences, the
    spectrum on half of it -> 2 x 0.5 x 3600 = 3600 s; flight 1800 s x 100 -> 180 000 s;
    a record of 2 s filling a 10 s share of a 20 s phase x 3 -> 3 x 10 / 2 = 15 passes
    (30 s); 3 sweep sequences of 4.32 min (8.644 oct at 2 oct/min) -> 3 sequences; a shock
    3 times per landing x 5 landings -> 15 shocks."""
    road = _phase(session, engineer, program, "road", 3600.0, 2)
    flight = _phase(session, engineer, program, "flight", 1800.0, 100)
    taxi = _phase(session, engineer, program, "taxi", 20.0, 3)
    climb = _phase(session, engineer, program, "climb", 600.0, 3)
    landing = _phase(session, engineer, program, "landing", 30.0, 5)
    flat = {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01]}
    a = _env(session, engineer, unit, road, "road half", K.random, {**flat, "share": 0.5})
    b = _env(session, engineer, unit, flight, "flight", K.random, flat)
    c = _env(session, engineer, unit, taxi, "taxi record", K.time_history,
             {"dt_s": 0.001, "accel_g": list(np.sin(np.arange(2000) * 0.3)), "share": 0.5})
    d = _env(session, engineer, unit, climb, "climb sine", K.sine, _sine(2.0, 1, 5.0, 2000.0))
    e = _env(session, engineer, unit, landing, "touchdown", K.shock,
             {"freq_hz": [100.0, 1000.0], "accel_g": [20.0, 100.0], "q": 10, "count": 3})
    items = {x.name: LifeItem(x, _rev(x)) for x in (a, b, c, d, e)}
    assert exposure_s(items["road half"]) == pytest.approx(3600.0)
    assert exposure_s(items["flight"]) == pytest.approx(180_000.0)
    assert exposure(c, _rev(c)) == pytest.approx((15.0, "passes of the record"))
    assert exposure_s(items["taxi record"]) == pytest.approx(30.0)
    assert exposure(d, _rev(d)) == (3.0, "sweep sequences")
    sweep_s = math.log2(2000 / 5) / 2.0 * 60.0  # octaves / (oct/min) [s]
    assert exposure_s(items["climb sine"]) == pytest.approx(3 * sweep_s, rel=1e-9)
    assert exposure(e, _rev(e)) == (15.0, "shocks")


def test_defect5_sweeps_longer_than_their_phase_are_refused(session, engineer, program, unit):
    """40 sweeps of 5-2000 Hz at 0.8 oct/min: 40 x 8.644 oct / 0.8 oct/min = 432.2 min =
    7.2 h, in a 2 h occurrence: refused at import with the numbers."""
    ops = _phase(session, engineer, program, "operation", 7200.0)
    with pytest.raises(ValidationFailed) as err:
        _env(session, engineer, unit, ops, "long sweeps", K.sine, _sine(0.8, 40, 5.0, 2000.0))
    own = 40 * math.log2(2000 / 5) / 0.8 * 60
    msg = str(err.value)
    assert f"{own:.6g} s" in msg and "7200 s" in msg and "operation" in msg
    # a share of the phase: 1 sweep fits 0.5 x 7200 s, the spectrum's 5000 s does not
    with pytest.raises(ValidationFailed, match="0.5 x 7200 s = 3600 s"):
        _env(session, engineer, unit, ops, "half", K.random,
             {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01], "duration_s": 5000.0,
              "share": 0.5})
    with pytest.raises(ValidationFailed, match="share"):
        _env(session, engineer, unit, ops, "bad share", K.random,
             {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01], "share": 1.5})


def test_defect5_derivation_rechecks_the_exposure(session, engineer, program, unit):
    """A revision stored before the rule (or under a phase since shortened) is refused at
    derivation, naming the revision."""
    ops = _phase(session, engineer, program, "operation", 7200.0)
    env = _env(session, engineer, unit, ops, "sweeps", K.sine, _sine(0.8, 10, 5.0, 2000.0))
    ops.duration_s = 600.0  # as a row written before the check existed
    session.flush()
    with pytest.raises(ValidationFailed, match="sweeps r1") as err:
        _derive(session, engineer, unit, [_rev(env)], kind="sine")
    assert "600 s" in str(err.value)


# --- time compression per input ---------------------------------------------------------


def test_defect2_each_input_is_compressed_from_its_own_exposure(session, engineer, program,
                                                                unit):
    """Envelope of a 24 h transport spectrum and a 530 h operation spectrum, 1 h test,
    m = 7.5 (MIL-STD-810H Method 514.8 Annex A: W2/W1 = (T1/T2)^(2/m)): where transport
    governs (above 300 Hz) the level is 0.01 x 24^(2/7.5) = 0.02334 g^2/Hz, not
    0.01 x 554^(2/7.5) = 0.0539 g^2/Hz (the sum of the exposures)."""
    road = _phase(session, engineer, program, "transport", 86_400.0)
    ops = _phase(session, engineer, program, "operation", 3600.0, 530)
    transport = _env(session, engineer, unit, road, "transport", K.random,
                     {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01]})
    operation = _env(session, engineer, unit, ops, "operation", K.random,
                     {"freq_hz": [20.0, 100.0, 300.0, 2000.0],
                      "asd_g2_hz": [0.001, 0.005, 0.001, 0.0001]})
    level = levels.result_of(_derive(session, engineer, unit, [_rev(transport),
                                                              _rev(operation)]))
    steps = [st for st in level.steps if st.step == "time compression"]
    assert [st.inputs for st in steps] == [["transport r1"], ["operation r1"]]
    assert steps[0].db == pytest.approx(10 * math.log10(24 ** (2 / 7.5)), rel=1e-9)
    assert steps[1].db == pytest.approx(10 * math.log10(530 ** (2 / 7.5)), rel=1e-9)
    assert steps[0].values["life_s"] == 86_400.0  # the input's own exposure
    assert steps[0].values["test_s"] == 3600.0 and steps[0].values["exponent"] == 7.5
    assert level.duration_s == 3600.0
    at = psd.asd_at(level.freq_hz, level.asd_g2_hz, [1000.0, 2000.0])
    assert at == pytest.approx([0.01 * 24 ** (2 / 7.5)] * 2, rel=1e-6)
    # where operation governs (100 Hz): 0.005 x 530^(2/7.5) = 0.0266 g^2/Hz
    g100 = psd.asd_at(level.freq_hz, level.asd_g2_hz, [100.0])[0]
    assert g100 >= 0.005 * 530 ** (2 / 7.5) * (1 - 1e-9)


# --- FDS equivalent ---------------------------------------------------------------------


def _half_sine(peak_g, width_s, dt, total_s):
    t = np.arange(int(total_s / dt)) * dt
    return np.where(t < width_s, peak_g * np.sin(np.pi * t / width_s), 0.0)


@pytest.mark.filterwarnings("ignore::qualplan.dynamics.errors.AccuracyWarning")
def test_defect4_fds_equivalent_of_a_sine_a_shock_and_two_spectra(session, engineer,
                                                                  program, unit):
    """A sine sweep, a half-sine shock record and two spectra, FDS-equivalent over 120 s
    (GEVS qualification). Checks: the level's exact FDS in 120 s equals the Miner sum of
    the inputs' FDS over their own exposures computed here from the core alone (for the b
    that governs each fn; the others it covers); and the level is the closed-form
    narrow-band inversion G = [D / (fn T Gamma(1 + b/2))]^(2/b) / (pi fn Q) (Lalanne,
    Mechanical Vibration and Shock Analysis vol. 5) of that sum, to the narrow-band
    model's own error. Before: KeyError (HTTP 500) on the sine."""
    pol = _policy_with(session, engineer, "two b", equivalence=s.EquivalenceRule(
        b=[4.0, 8.0], f_lo_hz=20.0, f_hi_hz=1000.0))
    hour = _phase(session, engineer, program, "hour", 3600.0)
    half = _phase(session, engineer, program, "half hour", 1800.0, 2)
    drop = _phase(session, engineer, program, "drop", 10.0, 3)
    sine = _env(session, engineer, unit, hour, "sweep", K.sine, _sine(2.0, 2, 20.0, 500.0))
    dt = 1 / 10_000
    x = _half_sine(30.0, 0.004, dt, 0.05)
    shock = _env(session, engineer, unit, drop, "drop pulse", K.time_history,
                 {"dt_s": dt, "accel_g": x.tolist(), "duration_s": 0.05})  # once per drop
    wide = _env(session, engineer, unit, hour, "wide", K.random,
                {"freq_hz": [20.0, 1000.0], "asd_g2_hz": [0.002, 0.002]})
    low = _env(session, engineer, unit, half, "low", K.random,
               {"freq_hz": [20.0, 80.0, 200.0], "asd_g2_hz": [0.01, 0.02, 0.005]})
    revs = [_rev(e) for e in (sine, shock, wide, low)]
    level = levels.result_of(levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="equivalent", kind="random", axis=m.Axis.Z,
        combination="fds_equivalent", revision_ids=[r.id for r in revs], policy_id=pol.id,
        max_breakpoints=200)))
    eqstep = next(st for st in level.steps if st.step == "FDS equivalence")
    bp, g_bp = np.asarray(level.limit.freq_hz), np.asarray(level.limit.asd_g2_hz)
    from qualplan.dynamics.srs import octave_grid

    # breakpoints: the policy's grid (from 22.1 Hz) and the band's lower edge 20 Hz, held
    # flat at the first fn's value (docs/methods/equivalence.md)
    fn = octave_grid(20.0, 1000.0, 6)
    assert bp.tolist() == pytest.approx([20.0, *fn.tolist()])
    assert g_bp[0] == g_bp[1]
    g = g_bp[1:]
    q, t = 10.0, 120.0
    from qualplan.planning.envdata import sweep_of

    sweep = sweep_of(_rev(sine).spec)
    governs = np.zeros(fn.size, int)
    g_b = []
    for k, b in enumerate((4.0, 8.0)):
        life = (1 * fatigue.fds_sweep(sweep, fn, q, b)
                + 3 * fatigue.fds_time(x, dt, fn, q, b, free_decay=True, method="bandlimited")
                + fatigue.fds_random([20.0, 1000.0], [0.002, 0.002], 3600.0, fn, q, b)
                + fatigue.fds_random([20.0, 80.0, 200.0], [0.01, 0.02, 0.005], 3600.0, fn,
                                     q, b))
        achieved = fatigue.fds_random(bp, g_bp, t, fn, q, b)
        assert np.all(achieved >= life * (1 - 2e-3)), b
        nb = (life / (fn * t * gamma(1 + b / 2))) ** (2 / b) / (np.pi * fn * q)
        g_b.append(nb)
        exact = fatigue.equivalent_psd(fn, life, t, q, b, band_hz=(20.0, 1000.0))
        governs[np.isclose(g, exact, rtol=2e-3)] = k + 1
        assert eqstep.values["max_fds_error"][f"{b:g}"] <= 1e-3
    assert np.all(governs > 0)  # every fn is the inversion of one b's life FDS
    # narrow-band closed form: within its own error where the life's FDS is smooth
    nb = np.maximum(*g_b)
    ratio_db = 10 * np.log10(g / nb)
    assert np.median(np.abs(ratio_db)) < 0.5, ratio_db


def test_defect3_non_converging_equivalent_is_refused_and_not_stored(session, engineer,
                                                                     program, unit):
    """A 5 g sine sweep over 98-102 Hz on a faint 1e-6 g^2/Hz background: to do the
    sweep's damage near 100 Hz a random PSD must put a line there, and a random line's
    Rayleigh amplitudes (Gamma(1 + b/2) against 1 for a sine of the same rms; Lalanne
    vol. 4) do more damage off resonance than the background's whole life, at every fn:
    no positive PSD reaches the target (worst error 11 % for b = 8). The command answers
    with the worst error and its fn, and no level is stored."""
    hour = _phase(session, engineer, program, "hour", 3600.0)
    sweep = _env(session, engineer, unit, hour, "narrow sweep", K.sine,
                 _sine(1.0, 10, 98.0, 102.0, 5.0))
    faint = _env(session, engineer, unit, hour, "faint", K.random,
                 {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [1e-6, 1e-6]})
    before = len(levels.list_levels(session, unit.id))
    with pytest.raises(ValidationFailed) as err:
        _derive(session, engineer, unit, [_rev(sweep), _rev(faint)], policy="spaceflight-gevs",
                combination="fds_equivalent")
    msg = str(err.value)
    assert "did not converge" in msg and "worst FDS error" in msg and "fn = " in msg
    assert "not stored" in msg
    assert len(levels.list_levels(session, unit.id)) == before


def test_defect3_notched_spectrum_converges(session, engineer, program, unit):
    """A spectrum with a -70 dB notch one octave wide, its edges sharper than the policy's
    1/6-octave grid: the FDS inside the notch comes from the oscillators' skirts on the
    plateaus. Newton steps on the whole Jacobian reach it to 1e-3 (checked here against
    the core's exact FDS of the stored breakpoints); the diagonal iteration used before
    stopped at 4 % and the level was refused."""
    pol = _policy_with(session, engineer, "one b", equivalence=s.EquivalenceRule(
        b=[8.0], f_lo_hz=20.0, f_hi_hz=2000.0))
    hour = _phase(session, engineer, program, "hour", 3600.0)
    spec = {"freq_hz": [20.0, 299.0, 300.0, 600.0, 601.0, 2000.0],
            "asd_g2_hz": [0.01, 0.01, 1e-9, 1e-9, 0.01, 0.01]}
    notch = _env(session, engineer, unit, hour, "notched", K.random, spec)
    level = levels.result_of(levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="equivalent", kind="random", axis=m.Axis.Z,
        combination="fds_equivalent", revision_ids=[_rev(notch).id], policy_id=pol.id,
        max_breakpoints=200)))
    assert level.verdicts.converged
    from qualplan.dynamics.srs import octave_grid

    fn = octave_grid(20.0, 2000.0, 6)
    life = fatigue.fds_random(spec["freq_hz"], spec["asd_g2_hz"], 3600.0, fn, 10.0, 8.0)
    achieved = fatigue.fds_random(level.limit.freq_hz, level.limit.asd_g2_hz, 120.0, fn,
                                  10.0, 8.0)
    np.testing.assert_allclose(achieved, life, rtol=1e-3)


def test_defect3_equivalent_spans_the_band_below_the_first_fn(session, engineer, program,
                                                             unit):
    """Two flat spectra over 20-2000 Hz, the policy's band 20-2000 Hz at 15 points per
    octave (grid anchored at 1 kHz: the first fn is 20.6 Hz). Closed form (Lalanne,
    Mechanical Vibration and Shock Analysis vol. 5, narrow band / Miles: D = fn T
    (pi fn Q G)^(b/2) Gamma(1 + b/2) for a locally white PSD, so spectra of one shape
    combine as G = [sum T_i G_i^(b/2) / T]^(2/b)): the level is that flat PSD from 20 Hz
    on. Before: the PSD started at 20.6 Hz, its first oscillator lacked the inputs'
    20-20.6 Hz content, the iteration built a spike there and stopped 0.65 % off (the
    benchmark's refusal at 21.6 Hz, b = 4)."""
    pol = _policy_with(session, engineer, "b 4, 15 per octave", equivalence=s.EquivalenceRule(
        b=[4.0], f_lo_hz=20.0, f_hi_hz=2000.0, points_per_octave=15))
    hour = _phase(session, engineer, program, "hour", 3600.0)
    half = _phase(session, engineer, program, "half hour", 1800.0)
    a = _env(session, engineer, unit, hour, "cruise", K.random,
             {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, 0.01]})
    c = _env(session, engineer, unit, half, "climb", K.random,
             {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.03, 0.03]})
    level = levels.result_of(levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="equivalent", kind="random", axis=m.Axis.Z,
        combination="fds_equivalent", revision_ids=[_rev(a).id, _rev(c).id],
        policy_id=pol.id, max_breakpoints=200)))
    from qualplan.dynamics.srs import octave_grid

    b, t = 4.0, 120.0
    g_eq = ((3600.0 * 0.01 ** (b / 2) + 1800.0 * 0.03 ** (b / 2)) / t) ** (2 / b)
    assert g_eq == pytest.approx(0.128452, rel=1e-5)  # sqrt((0.36 + 1.62) / 120), by hand
    assert level.verdicts.converged
    assert level.limit.freq_hz[0] == 20.0 and level.limit.freq_hz[-1] == pytest.approx(2000.0)
    # the level's exact FDS in 120 s is the inputs' over their exposures, at every fn
    fn = octave_grid(20.0, 2000.0, 15)
    life = fatigue.fds_random([20.0, 2000.0], [g_eq, g_eq], t, fn, 10.0, b)
    achieved = fatigue.fds_random(level.limit.freq_hz, level.limit.asd_g2_hz, t, fn, 10.0, b)
    np.testing.assert_allclose(achieved, life, rtol=1e-3)
    # and the level is that flat PSD: 1e-3 on damage is (2/b) 1e-3 on an ASD where one
    # breakpoint governs its fn; the last fn (2000 Hz, the inputs' edge) sees half of its
    # resonance on the segment below it, two breakpoints share its damage: FDS check only
    np.testing.assert_allclose(level.limit.asd_g2_hz[:-1], g_eq, rtol=1e-3)


def test_defect3_records_alone_reach_their_band(session, engineer, program, unit):
    """A record sampled at 5120 Hz with content to 1 kHz: its FDS-equivalent level
    reaches 1 kHz (fs >= 5 fn, band-limited reconstruction) instead of stopping at 512 Hz."""
    from qualplan.dynamics.synthesis import gaussian_from_psd

    hour = _phase(session, engineer, program, "hour", 3600.0)
    fs = 5120.0
    x = gaussian_from_psd([20.0, 1000.0], [0.01, 0.01], 20.0, fs,
                          rng=np.random.default_rng(3))
    rec = _env(session, engineer, unit, hour, "record", K.time_history,
               {"dt_s": 1 / fs, "accel_g": x.tolist()})
    pol = _policy_with(session, engineer, "one b", equivalence=s.EquivalenceRule(
        b=[8.0], f_lo_hz=20.0, f_hi_hz=2000.0))
    level = levels.result_of(levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="equivalent", kind="random", axis=m.Axis.Z,
        combination="fds_equivalent", revision_ids=[_rev(rec).id], policy_id=pol.id,
        max_breakpoints=200)))
    assert level.limit.freq_hz[-1] >= 1000.0
    # the record's 0.01 g^2/Hz for 1 h compressed to 120 s: 0.01 x 30^(2/8) = 0.0234
    g = psd.asd_at(level.limit.freq_hz, level.limit.asd_g2_hz, [100.0, 900.0])
    assert g == pytest.approx([0.01 * 30 ** 0.25] * 2, rel=0.25)  # Welch-level scatter


# --- controllability --------------------------------------------------------------------


def test_smoothing_never_below_the_raw_level(session, engineer, program, unit):
    """A steep, wide-range envelope is raised onto controllable breakpoints: every slope
    within the policy's limit, range within its limit, never below the raw level at any
    frequency (checked on 1/48-octave lines), its excess a step in dB."""
    ctl = s.ControlRule(max_slope_db_per_oct=12.0, max_dynamic_range_db=20.0,
                        floor_g2_hz=1e-5)
    gevs = policies.rules_of(policies.policy_ref(session, "spaceflight-gevs"))
    random = {g: rule.model_copy(update={"minimum_profile": None})
              for g, rule in gevs.random.items()}
    pol = _policy_with(session, engineer, "tight control", control=ctl, random=random)
    hour = _phase(session, engineer, program, "hour", 3600.0)
    raw_f = [20.0, 100.0, 110.0, 400.0, 420.0, 2000.0]
    raw_a = [1e-6, 1e-3, 0.05, 0.05, 1e-4, 1e-7]
    env = _env(session, engineer, unit, hour, "steep", K.random,
               {"freq_hz": raw_f, "asd_g2_hz": raw_a})
    level = levels.result_of(levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="steep", kind="random", axis=m.Axis.Z,
        revision_ids=[_rev(env).id], policy_id=pol.id, max_breakpoints=50)))
    step = next(st for st in level.steps if st.step == "controllable smoothing")
    assert step.db > 0 and step.values["raised_breakpoints"] == 4
    assert level.verdicts.controllable is True
    f, a = np.asarray(level.freq_hz), np.asarray(level.asd_g2_hz)
    assert np.all(np.abs(psd.slopes_db_per_oct(f, a)) <= 12.0 + 1e-9)
    assert 10 * np.log10(a.max() / a.min()) <= 20.0 + 1e-9 and a.min() >= 1e-5 * (1 - 1e-12)
    lines = np.geomspace(20.0, 2000.0, 48 * 7)
    margin = 10 ** (3.0 / 10)  # GEVS qualification margin +3 dB
    assert np.all(psd.asd_at(f, a, lines) >= psd.asd_at(raw_f, raw_a, lines) * margin
                  * (1 - 1e-9))
    # excess on g rms, as stated: 20 log10(g rms after / before)
    before = psd.grms(raw_f, raw_a) * math.sqrt(margin)
    assert step.db == pytest.approx(20 * math.log10(level.grms / before), rel=1e-6)


def test_control_limits_are_rules_of_the_policy():
    rules = policies.SPACEFLIGHT_DEFAULTS
    assert rules.control.max_slope_db_per_oct == 24.0
    assert rules.control.max_dynamic_range_db == 40.0
    with pytest.raises(ValueError):
        s.ControlRule(max_slope_db_per_oct=-3.0)
    assert not hasattr(levels, "MAX_SLOPE_DB_PER_OCT")


# --- record analysis --------------------------------------------------------------------


def test_defect6_record_analysis_resolves_the_band_lower_edge(session, engineer, program,
                                                              unit):
    """Policy band from 10 Hz, record at 5120 Hz: the default analysis uses 2.5 Hz lines
    (4 below 10 Hz), so the level starts at 10 Hz; the step prints the settings and the
    dof (2 x averages x window factor, Bendat & Piersol ch. 11). Before: 20 Hz lines,
    10-20 Hz dropped."""
    from qualplan.dynamics.synthesis import gaussian_from_psd

    pol = _policy_with(session, engineer, "from 10 Hz", equivalence=s.EquivalenceRule(
        b=[8.0], f_lo_hz=10.0, f_hi_hz=2000.0))
    hour = _phase(session, engineer, program, "hour", 3600.0)
    fs = 5120.0
    x = gaussian_from_psd([5.0, 2000.0], [0.01, 0.01], 30.0, fs, rng=np.random.default_rng(5))
    rec = _env(session, engineer, unit, hour, "record", K.time_history,
               {"dt_s": 1 / fs, "accel_g": x.tolist()})
    level = levels.result_of(levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="from record", kind="random", axis=m.Axis.Z,
        purpose=m.LevelPurpose.analysis, revision_ids=[_rev(rec).id], policy_id=pol.id)))
    assert level.freq_hz[0] <= 10.0 + 1e-9
    step = next(st for st in level.steps if st.step == "record analysis")
    assert step.values["resolution_hz"] == pytest.approx(2.5, rel=1e-3)
    assert step.values["window"] == "hann" and step.values["overlap"] == 0.5
    assert step.values["dof"] > 2 and "defaults" in step.values["settings"]
    # a coarser chosen resolution is refused; so is a record shorter than one segment
    with pytest.raises(ValidationFailed, match="analysis.resolution_hz"):
        levels.derive_level(session, engineer, s.LevelRecipe(
            product_id=unit.id, name="coarse", kind="random", axis=m.Axis.Z,
            purpose=m.LevelPurpose.analysis, revision_ids=[_rev(rec).id], policy_id=pol.id,
            analysis=s.RecordAnalysis(resolution_hz=5.0)))
    short = _env(session, engineer, unit, hour, "short", K.time_history,
                 {"dt_s": 1 / fs, "accel_g": x[:1024].tolist()})
    with pytest.raises(ValidationFailed, match="at least 0.4 s"):
        levels.derive_level(session, engineer, s.LevelRecipe(
            product_id=unit.id, name="short", kind="random", axis=m.Axis.Z,
            purpose=m.LevelPurpose.analysis, revision_ids=[_rev(short).id],
            policy_id=pol.id))


# --- load factors -----------------------------------------------------------------------


def _exact_abs_rms(f, a, fn, q):
    """Reference: sqrt of the integral of |H_abs|^2 W over the PSD band (scipy quad)."""
    z = 1 / (2 * q)

    def h2(x):
        r = x / fn
        return (1 + (2 * z * r) ** 2) / ((1 - r * r) ** 2 + (2 * z * r) ** 2)

    total = 0.0
    for lo, hi in zip(f[:-1], f[1:], strict=True):
        pts = [fn] if lo < fn < hi else None
        total += integrate.quad(lambda x: h2(x) * psd.asd_at(f, a, [x])[0], lo, hi,
                                points=pts, limit=400, epsabs=0, epsrel=1e-10)[0]
    return math.sqrt(total)


@pytest.mark.parametrize("shape", ["flat", "sloped"])
def test_defect7_load_factor_is_the_exact_sdof_response(session, engineer, program, unit,
                                                        shape):
    """Flat 0.01 g^2/Hz, 1 Hz-100 kHz (0..inf to 0.03 %), fn = 100 Hz, Q = 10: the exact
    mean square is Miles' x (1 + 1/Q^2) (integral of |H_abs|^2 over 0..inf =
    pi fn Q / 2 (1 + 4 zeta^2)),
    Miles 0.50 % low. Sloped (+12 dB/oct to fn, -12 after): Miles uses G(fn) only and
    is further off; the reference is the quadrature of |H|^2 W (Miles 1954)."""
    hour = _phase(session, engineer, program, "hour", 3600.0)
    if shape == "flat":
        f, a = [1.0, 100_000.0], [0.01, 0.01]
    else:
        f, a = [20.0, 100.0, 500.0], [0.01 / 25 ** 2, 0.01, 0.01 / 25 ** 2]
    env = _env(session, engineer, unit, hour, "spectrum", K.random,
               {"freq_hz": f, "asd_g2_hz": a})
    pol = _policy_with(session, engineer, "no margin", analysis=s.AnalysisRule(margin_db=0.0))
    lvl = levels.result_of(levels.derive_level(session, engineer, s.LevelRecipe(
        product_id=unit.id, name="loads", kind="random", axis=m.Axis.Z,
        purpose=m.LevelPurpose.analysis, revision_ids=[_rev(env).id], policy_id=pol.id,
        load_factor_fn_hz=100.0, load_factor_q=10.0, max_breakpoints=50)))
    lf = lvl.load_factor
    miles = math.sqrt(math.pi / 2 * 100 * 10 * 0.01)  # Miles 1954
    assert lf.miles_grms == pytest.approx(miles, rel=1e-9)
    ref = _exact_abs_rms(f, a, 100.0, 10.0)
    assert lf.exact_grms == pytest.approx(ref, rel=2e-3)
    assert lf.three_sigma_g == pytest.approx(3 * lf.exact_grms, rel=1e-12)
    assert lf.miles_difference_pct == pytest.approx(100 * (miles - ref) / ref, abs=0.2)
    if shape == "flat":
        assert ref == pytest.approx(miles * math.sqrt(1 + 1 / 100), rel=1e-3)
        assert lf.miles_difference_pct == pytest.approx(-0.496, abs=0.05)
    else:
        assert abs(lf.miles_difference_pct) > 2.0
    assert "approximation" in lf.method and "responsible engineer" in lf.caution


# --- runs of one condition --------------------------------------------------------------


def _npy(x) -> bytes:
    import io

    buf = io.BytesIO()
    np.save(buf, np.asarray(x, float))
    return buf.getvalue()


def test_defect1_runs_of_one_condition_count_the_exposure_once(session, engineer, program,
                                                               unit):
    """Three records of one operating condition uploaded together: one revision, three
    runs, the phase's exposure (1 h x 10 = 36 000 s) counted once: compression to 1 h with
    m = 7.5 is 10 log10(10^(2/7.5)) = 2.667 dB (MIL-STD-810H 514.8 Annex A), not
    10 log10(30^(2/7.5)) = 3.94 dB (+1.27 dB) as when each run counted as the phase."""
    from qualplan.dynamics.synthesis import gaussian_from_psd

    ops = _phase(session, engineer, program, "operation", 3600.0, 10)
    fs = 2048.0
    runs = [gaussian_from_psd([20.0, 500.0], [0.01, 0.01], 8.0, fs,
                              rng=np.random.default_rng(k)) for k in range(3)]
    env = environments.create_environment_from_file(
        session, engineer, s.EnvironmentFromFile(
            product_id=unit.id, phase_id=ops.id, name="cruise", kind=K.time_history,
            axis=m.Axis.Z, reading=s.FileReading(sample_rate_hz=fs, value_units="g")),
        "run1.npy", _npy(runs[0]), more_files=[("run2.npy", _npy(runs[1])),
                                                ("run3.npy", _npy(runs[2]))])
    assert len(env.revisions) == 1
    rev = _rev(env)
    assert rev.spec["run_samples"] == [r.size for r in runs]
    item = LifeItem(env, rev)
    assert exposure_s(item) == pytest.approx(36_000.0)
    level = levels.result_of(_derive(session, engineer, unit, [rev], combination="p95_50"))
    comp = [st for st in level.steps if st.step == "time compression"]
    assert len(comp) == 1 and comp[0].db == pytest.approx(10 * math.log10(10 ** (2 / 7.5)))
    assert level.life_exposure_s == pytest.approx(36_000.0)
    across = [st for st in level.steps if st.step.startswith("P95/50 across 3 runs")]
    assert across and across[0].values["n"] == 3
    # the run lengths must add up to the samples stored
    with pytest.raises(ValidationFailed, match="data.run_samples"):
        environments.revise_environment(session, engineer, env.id, s.RevisionIn(
            data={"dt_s": 1 / fs, "accel_g": [0.0] * 4, "run_samples": [2, 3]}))


def test_runs_of_measured_spectra_p95_across_runs(session, engineer, program, unit):
    """Three measured spectra of one condition in one revision: the P95/50 goes across
    the runs (normal tolerance limit, n = 3, NASA-HDBK-7005) and the exposure counts once;
    the environment's own spectrum is the envelope of its runs."""
    ops = _phase(session, engineer, program, "operation", 3600.0, 10)
    runs = [{"freq_hz": [20.0, 2000.0], "asd_g2_hz": [g, g]} for g in (0.01, 0.012, 0.008)]
    env = _env(session, engineer, unit, ops, "measured", K.random, {"runs": runs})
    assert _rev(env).spec["asd_g2_hz"] == pytest.approx([0.012, 0.012], rel=1e-12)
    level = levels.result_of(_derive(session, engineer, unit, [_rev(env)],
                                     combination="p95_50", purpose=m.LevelPurpose.analysis))
    step = next(st for st in level.steps if st.step.startswith("P95/50 across 3 runs"))
    x = np.log10([0.01, 0.012, 0.008])
    upper = 10 ** (x.mean() + step.values["k_factor"] * x.std(ddof=1))
    assert psd.asd_at(level.limit.freq_hz, level.limit.asd_g2_hz, [500.0])[0] == \
        pytest.approx(upper, rel=1e-6)
    assert level.life_exposure_s == pytest.approx(36_000.0)
    with pytest.raises(ValidationFailed, match="data.runs"):
        _env(session, engineer, unit, ops, "one run", K.random, {"runs": runs[:1]})
