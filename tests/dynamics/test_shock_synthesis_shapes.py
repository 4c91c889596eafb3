"""Shock synthesis on a set of target shapes, both methods, Q = 10 (issue 16).

Sources: the acceptance rule of the issue (maximax SRS within +/-1.5 dB at every grid
frequency, final velocity and displacement zero); the SRS recomputed independently by
the public `srs` (Smallwood 1981, ISO 18431-4); the reachability bound of
`srs_ratio_bound` checked against Young's convolution inequality on random records,
the Laplace transform of |sin| (closed form) and scipy's impulse response.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from qualplan.dynamics import shock_synthesis as SS
from qualplan.dynamics import srs as S
from qualplan.dynamics.errors import InputError

# Target shapes (invented): 100 g plateau, 100 Hz - 2 kHz
SHAPES = {
    "flat": ([100.0, 2000.0], [100.0, 100.0]),
    "rise+6": ([100.0, 500.0, 2000.0], [20.0, 100.0, 100.0]),
    "rise+9": ([100.0, 500.0, 2000.0], [100.0 * 0.2 ** 1.5, 100.0, 100.0]),
    "rise+12": ([100.0, 500.0, 2000.0], [4.0, 100.0, 100.0]),
    # +6 dB/oct to 500 Hz, flat to 1 kHz, then falling for one octave
    "fall-6": ([100.0, 500.0, 1000.0, 2000.0], [20.0, 100.0, 100.0, 50.0]),
    "fall-12": ([100.0, 500.0, 1000.0, 2000.0], [20.0, 100.0, 100.0, 25.0]),
}
FALL_24 = S.SrsProfile([100.0, 500.0, 1000.0, 2000.0], [20.0, 100.0, 100.0, 6.25])
# 1/12-octave grid that ends on the 2 kHz breakpoint (the default grid ends at 1903 Hz)
GRID_TO_2K = 2000.0 * 2.0 ** (-np.arange(51, -1, -1) / 12)
# -12 dB/oct above 1 kHz sustained for three octaves (to 8 kHz)
FALL_12_LONG = S.SrsProfile([100.0, 500.0, 1000.0, 8000.0], [20.0, 100.0, 100.0, 100.0 / 64])


@pytest.mark.parametrize("method", ["wavelets", "damped_sines"])
@pytest.mark.parametrize("shape", list(SHAPES))
def test_target_shapes_converge(shape, method):
    target = S.SrsProfile(*SHAPES[shape])
    res = SS.synthesize_shock(target, seed=0, method=method)
    assert res.converged and res.max_error_db <= 1.5, (res.max_error_db, res.warnings)
    achieved = S.srs(res.accel_g, res.dt_s, res.freq_hz, 10.0)  # independent recomputation
    err = 20 * np.log10(achieved / target.value_at(res.freq_hz))
    assert np.abs(err).max() <= 1.5 + 1e-9
    # ends at rest (closed form: odd-N wavelets / compensated sinusoids; 2x2 correction)
    assert abs(res.final_velocity_m_s) <= 1e-9 * res.peak_velocity_m_s
    assert abs(res.final_displacement_m) <= 1e-9 * res.peak_displacement_m
    # peak stroke reported, as integrated independently (linear between samples)
    v, d = SS.integrate_accel(res.accel_g, res.dt_s)
    assert res.peak_displacement_m == pytest.approx(np.abs(d).max(), rel=1e-12)
    assert res.peak_velocity_m_s == pytest.approx(np.abs(v).max(), rel=1e-12)
    assert res.peak_accel_g == pytest.approx(np.abs(res.accel_g).max(), rel=1e-12)


@pytest.mark.parametrize("target, grid, low, high", [
    # -24 dB/oct for one octave: the SRS at 1 kHz is at most 10.29 times the SRS at
    # 2 kHz (srs_ratio_bound, Q = 10), the target asks 16: any record misses by at
    # least (24.08 - 20.24 - 0.11 sampling margin) / 2 = 1.87 dB somewhere.
    (FALL_24, GRID_TO_2K, 1.8, 1.95),
    # -12 dB/oct for three octaves: the default grid ends at 7.6 kHz, 35.2 dB below the
    # plateau, where the SRS can fall by at most about 4Q/pi (22 dB; srs_ratio_bound)
    (FALL_12_LONG, None, 6.0, 7.0),
], ids=["-24dB/oct-1oct", "-12dB/oct-2oct"])
def test_unreachable_fall_is_refused_with_the_reason(target, grid, low, high):
    for method in ("wavelets", "damped_sines"):
        with pytest.raises(InputError, match="target") as info:
            SS.synthesize_shock(target, grid, method=method)
        msg = str(info.value)
        assert "cannot be met" in msg and "Hz" in msg and "dB" in msg
        worst = float(msg.split("at least ")[1].split(" dB")[0])
        assert max(low, 1.5) < worst < high
    # with a tolerance wider than that worst error the target is accepted for synthesis
    SS.synthesize_shock(target, grid, tolerance_db=high + 0.5, n_trials=1, max_iterations=2)


def _abs_accel_tf(w, q):
    z = 1 / (2 * q)
    return [2 * z * w, w * w], [1.0, 2 * z * w, w * w]


def test_ratio_bound_against_independent_sources():
    q = 10.0
    z = 1 / (2 * q)
    # 1. The bound is the L1 norm of an impulse response, so at least the peak gain
    #    max |G(jw)| of G = H_from / H_to (closed-form transfer functions)
    for r in (0.9, 0.75, 0.5, 0.25):
        w = np.geomspace(1e-3, 1e3, 20001)
        bf, af = _abs_accel_tf(r, q)
        bt, at = _abs_accel_tf(1.0, q)
        g = (np.polyval(bf, 1j * w) / np.polyval(af, 1j * w)) / (
            np.polyval(bt, 1j * w) / np.polyval(at, 1j * w))
        bound = SS.srs_ratio_bound(r, 1.0, q)
        assert bound >= np.abs(g).max() * (1 - 1e-6)
        assert bound <= 1.5 * np.abs(g).max()
    # 2. For f_from << f_to, G tends to H_from: the L1 norm of the oscillator's own
    #    impulse response, here from scipy.signal.impulse (an independent code path)...
    t = np.linspace(0, 400 / z, 400_001)
    _, h = signal.impulse(_abs_accel_tf(1.0, q), T=t)
    l1 = np.trapezoid(np.abs(h), t)
    assert SS.srs_ratio_bound(1.0, 1000.0, q) == pytest.approx(l1, rel=5e-3)
    # ...whose pseudo-acceleration part has the closed form coth(pi zeta / (2 sqrt(1-zeta^2)))
    # (Laplace transform of |sin|, standard tables); same integration, 0.1 %
    _, hp = signal.impulse(([1.0], [1.0, 2 * z, 1.0]), T=t)
    assert np.trapezoid(np.abs(hp), t) == pytest.approx(
        1 / np.tanh(np.pi * z / (2 * np.sqrt(1 - z * z))), rel=1e-3)


def test_ratio_bound_holds_on_records():
    # Young's inequality: no record gives SRS(f1)/SRS(f2) above the bound. Records
    # built to favour f1: long sines at f1 (the steady ratio |G(j w1)|), square waves
    # at f1, and random noise; Q = 10, fs = 40 kHz.
    dt = 1 / 40_000
    t = np.arange(8000) * dt
    f1, f2 = 1000.0, 2000.0
    bound = SS.srs_ratio_bound(f1, f2, 10.0)
    rng = np.random.default_rng(5)
    records = [np.sin(2 * np.pi * f1 * t), np.sign(np.sin(2 * np.pi * f1 * t + 0.1)),
               rng.standard_normal(t.size)]
    best = 0.0
    for x in records:
        s1, s2 = S.srs(x, dt, [f1, f2], 10.0, method="cubic")
        best = max(best, s1 / s2)
        assert s1 / s2 <= bound
    assert best > 0.6 * bound  # the square wave comes close: the bound is not loose


# The two falling targets that stopped outside +/-1.5 dB before the rows of the
# Gauss-Newton step were scaled by their own target (docs/methods/shock-synthesis.md
# section 10): measured before 1.55-1.78 dB (wavelets, seeds 0-2) and 1.84-2.11 dB
# (damped sines, seeds 0-2); after 1.40 and 1.40 dB.
PYRO_FALLING = S.SrsProfile([100.0, 1000.0, 3000.0, 10000.0], [30.0, 1000.0, 1000.0, 150.0])
SHAKER_FALLING = S.SrsProfile([10.0, 100.0, 500.0, 2000.0], [10.0, 100.0, 100.0, 20.0])


@pytest.mark.parametrize("target, method", [(PYRO_FALLING, "wavelets"),
                                            (SHAKER_FALLING, "damped_sines")],
                         ids=["pyro-9.5dB/oct-wavelets", "shaker-falling-damped-sines"])
def test_formerly_stalled_falling_targets_converge(target, method):
    res = SS.synthesize_shock(target, seed=0, method=method)
    assert res.converged, res.warnings
    achieved = S.srs(res.accel_g, res.dt_s, res.freq_hz, 10.0)  # independent recomputation
    assert np.abs(20 * np.log10(achieved / target.value_at(res.freq_hz))).max() <= 1.5 + 1e-9
    assert abs(res.final_velocity_m_s) <= 1e-9 * res.peak_velocity_m_s
    assert abs(res.final_displacement_m) <= 1e-9 * res.peak_displacement_m
    # the record's peak held near the top-end target (the SRS tends to it at high fn)
    assert res.peak_accel_g <= target.accel_g[-1] * 10 ** (1.5 / 20) * 1.05
