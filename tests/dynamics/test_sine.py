"""Sine sweeps, dwells, envelopes and notching (qualplan.dynamics.sine)."""

import math

import numpy as np
import pytest

from qualplan.dynamics import sdof, sine
from qualplan.dynamics.errors import InputError

IN = 0.0254
G0 = 9.80665


@pytest.mark.parametrize(
    "f1, f2, rate, t_s, cycles",
    [
        # closed form (log sweep, recomputed)
        (5.0, 100.0, 2.0, 129.66, 4111.7),
        (5.0, 100.0, 4.0, 64.83, 2055.8),
        (20.0, 2000.0, 1.0, 398.63, 171392),
    ],
)
def test_log_sweep_time_and_cycles(f1, f2, rate, t_s, cycles):
    assert sine.sweep_time(f1, f2, rate) == pytest.approx(t_s, abs=0.006)
    assert sine.sweep_cycles(f1, f2, rate) == pytest.approx(cycles, rel=2e-5)
    assert sine.sweep_time(f2, f1, rate) == sine.sweep_time(f1, f2, rate)  # down = up


def test_half_power_cycles():
    # closed form: N_hp = 60 fn / (R Q ln 2) = 432.8 cycles, 4.33 s (fn 100, Q 10, 2 oct/min)
    sw = sine.Sweep(sine.sine_spec(5, 500, [("acceleration", 1.0)]), 2.0)
    lo, hi = 100 * (1 - 1 / 20), 100 * (1 + 1 / 20)
    assert sw.cycles_in_band(lo, hi) == pytest.approx(432.8, abs=0.05)
    assert sw.time_in_band_s(lo, hi) == pytest.approx(4.33, abs=0.005)


def test_linear_sweep():
    # closed form: t = (f2 - f1)/r, N = (f2^2 - f1^2)/(2 r)
    assert sine.sweep_time_linear(10, 110, 2.0) == pytest.approx(50.0)
    assert sine.sweep_cycles_linear(10, 110, 2.0) == pytest.approx((110**2 - 10**2) / 4)
    sw = sine.Sweep(sine.sine_spec(10, 110, [("acceleration", 1.0)]), 2.0, mode="linear",
                    direction="up-down", n_sweeps=3)
    assert sw.passes == 6
    assert sw.duration_s == pytest.approx(300.0)
    assert sw.frequency_at(10.0) == pytest.approx(30.0)


def test_sweep_directions_counts_and_time_per_band():
    spec = sine.sine_spec(5, 100, [("displacement", 6.35e-3), ("acceleration", 1.0)])
    up = sine.Sweep(spec, 2.0)
    ud = sine.Sweep(spec, 2.0, direction="up-down", n_sweeps=2)
    assert up.duration_s == pytest.approx(129.66, abs=0.006)
    assert ud.duration_s == pytest.approx(4 * up.duration_s)
    bands = up.time_per_band_s()
    assert len(bands) == 2
    assert sum(t for *_f, t in bands) == pytest.approx(up.duration_s)
    # closed form: f(t) = f1 2^(R t / 60)
    assert up.frequency_at(30.0) == pytest.approx(5 * 2 ** 1.0)
    assert sine.Sweep(spec, 2.0, direction="down").frequency_at(30.0) == pytest.approx(50.0)


def test_crossovers_domain_values():
    # closed form f = sqrt(A / (0.0511 DA)): 0.5 in DA / 10 g -> 19.78 Hz;
    # 12.7 mm DA / 1 g -> 6.254 Hz
    f = sine.crossover_hz("displacement", 0.25 * IN, "acceleration", 10.0)
    assert f == pytest.approx(19.78, abs=0.005)
    spec = sine.sine_spec(5, 100, [("displacement", 12.7e-3 / 2), ("acceleration", 1.0)])
    # (printed to 4 digits; sqrt(g0 / 6.35 mm) / 2 pi = 6.25451)
    assert spec.bands[0].f_hi_hz == pytest.approx(6.254, abs=1e-3)
    # velocity/acceleration crossover f = A g0 / (2 pi V) (closed form)
    assert sine.crossover_hz("velocity", 0.5, "acceleration", 2.0) == pytest.approx(
        2 * G0 / (2 * math.pi * 0.5))


def test_amplitude_relations():
    # closed form: 10 g at 20 Hz -> X_pk 6.210 mm, DA 12.420 mm (0.4890 in), V_pk 0.7804 m/s
    spec = sine.SineSpec((sine.SineBand.acceleration(10, 100, 10.0),))
    assert spec.displacement_m(20.0) * 1e3 == pytest.approx(6.210, abs=5e-4)
    assert 2 * spec.displacement_m(20.0) / IN == pytest.approx(0.4890, abs=5e-5)
    assert spec.velocity_m_s(20.0) == pytest.approx(0.7804, abs=5e-5)


def test_displacement_band_says_peak_or_peak_to_peak():
    a = sine.SineBand.displacement(5, 10, 0.01, measure="peak_to_peak")
    b = sine.SineBand.displacement(5, 10, 0.005, measure="peak")
    assert a == b
    with pytest.raises(TypeError):
        sine.SineBand.displacement(5, 10, 0.01)  # measure is required
    with pytest.raises(InputError, match="measure"):
        sine.SineBand.displacement(5, 10, 0.01, measure="rms")


def test_spec_amplitude_continuous_at_crossover_and_zero_outside():
    spec = sine.sine_spec(5, 100, [("displacement", 6.35e-3), ("acceleration", 1.0)])
    fc = spec.bands[0].f_hi_hz
    assert spec.accel_g(fc * (1 - 1e-9)) == pytest.approx(1.0, rel=1e-6)
    assert spec.accel_g(50.0) == 1.0
    assert spec.accel_g(200.0) == 0.0
    # constant displacement: a ~ f^2 (closed form)
    assert spec.accel_g(5.0) == pytest.approx((5 / fc) ** 2)


def test_envelope():
    a = sine.sine_spec(5, 100, [("acceleration", 1.0)])
    b = sine.sine_spec(20, 200, [("acceleration", 0.5)])
    env = sine.envelope([a, b])
    assert env.accel_g(50.0) == pytest.approx(1.0)
    assert env.accel_g(150.0) == pytest.approx(0.5)
    assert env.f_lo_hz == 5.0 and env.f_hi_hz == 200.0


def test_notch_sdof_keeps_response_under_limit():
    # closed form: response = |T| x input; at fn the notched input is limit / |T(fn)|
    spec = sine.sine_spec(5, 500, [("acceleration", 1.0)])
    nt = sine.notch(spec, 5.0, fn_hz=100.0, q=10.0)
    f = np.geomspace(5, 500, 2000)
    resp = nt.accel_g(f) * sdof.transmissibility(f, 100.0, 10.0)
    assert resp.max() <= 5.0 * (1 + 1e-3)
    assert nt.accel_g(100.0) == pytest.approx(5.0 / math.sqrt(101), rel=1e-3)
    assert nt.accel_g(20.0) == pytest.approx(1.0)  # untouched away from the mode
    assert "notch depth" in nt.notes[0]


def test_notch_measured_transmissibility():
    spec = sine.sine_spec(10, 1000, [("acceleration", 2.0)])
    table = ([10, 90, 100, 110, 1000], [1.0, 4.0, 20.0, 4.0, 0.5])
    nt = sine.notch(spec, 10.0, transmissibility=table)
    assert nt.accel_g(100.0) == pytest.approx(0.5)
    assert nt.accel_g(10.0) == pytest.approx(2.0)


def test_notch_table_must_cover_the_band():
    spec = sine.sine_spec(10, 1000, [("acceleration", 2.0)])
    with pytest.raises(InputError, match="cover"):
        sine.notch(spec, 10.0, transmissibility=([20, 100, 500], [1.0, 20.0, 1.0]))
    with pytest.raises(InputError, match="either"):
        sine.notch(spec, 10.0)


def test_envelope_with_a_gap_is_zero_in_the_gap():
    a = sine.sine_spec(5, 20, [("acceleration", 1.0)])
    b = sine.sine_spec(50, 100, [("acceleration", 2.0)])
    env = sine.envelope([a, b])
    assert env.accel_g(10.0) == pytest.approx(1.0)
    assert env.accel_g(30.0) == 0.0  # no specification covers 30 Hz
    assert env.accel_g(75.0) == pytest.approx(2.0)


def test_dwell():
    d = sine.SineDwell(100.0, 1.0, 60.0)
    assert d.cycles == 6000.0


def test_bad_input():
    with pytest.raises(InputError, match="rate"):
        sine.sweep_time(5, 100, 0.0)
    with pytest.raises(InputError, match="rate"):
        sine.Sweep(sine.sine_spec(5, 100, [("acceleration", 1.0)]), 0.0)
    with pytest.raises(InputError, match="f1_hz"):
        sine.sweep_time(-5, 100, 2.0)
    with pytest.raises(InputError, match="f_hi_hz"):
        sine.SineBand.acceleration(100, 5, 1.0)
    with pytest.raises(InputError, match="crossover"):
        sine.sine_spec(50, 100, [("displacement", 6.35e-3), ("acceleration", 1.0)])
    with pytest.raises(InputError, match="n_sweeps"):
        sine.Sweep(sine.sine_spec(5, 100, [("acceleration", 1.0)]), 1.0, n_sweeps=0)
    with pytest.raises(InputError, match="bands"):
        sine.SineSpec((sine.SineBand.acceleration(5, 10, 1), sine.SineBand.acceleration(20, 30, 1)))
