"""Shock synthesis on steep targets (issue 16): damped sines on a -9.5 dB/oct pyroshock,
the minimax amplitude steps, and a target that drops 20 dB within one octave (reached by
the synthesis from free samples, a linear program per set of peak instants).

Sources: sums of decaying sinusoids compensated for velocity (Smallwood & Nord, Shock and
Vibration Bulletin 44, 1974, from memory); the SRS recomputed by the public `srs`
(ramp-invariant filter, Smallwood 1981; ISO 18431-4) and by pyyeti's `srs` (reference
library, second opinion); the resonant build-up of an oscillator under a decaying sine
(closed form of the envelope equation, our derivation, checked against the filter); the
acceptance rule of the issue (maximax SRS within +/-1.5 dB at every grid frequency, final
velocity and displacement zero); the integrals of a piecewise-linear record (closed form).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.linalg import toeplitz
from scipy.optimize import linprog
from scipy.signal import lfilter

from qualplan.dynamics import sdof_filter
from qualplan.dynamics import shock_synthesis as SS
from qualplan.dynamics import srs as S
from qualplan.dynamics.errors import InputError

# 1000 g at 1-3 kHz falling -9.5 dB/oct to 150 g at 10 kHz (invented pyroshock shape)
PYRO_FALLING = S.SrsProfile([100.0, 1000.0, 3000.0, 10000.0], [30.0, 1000.0, 1000.0, 150.0])
# 100 g at 500 Hz - 1 kHz, then -20 dB within one octave (to 10 g at 2 kHz); invented
DROP_20 = S.SrsProfile([100.0, 500.0, 1000.0, 2000.0], [20.0, 100.0, 100.0, 10.0])


@pytest.mark.parametrize("q", [10.0, 20.0])
def test_damped_sine_gain_against_the_filter(q):
    # The peak response of an oscillator to exp(-zc w t) sin(w t) at its own frequency:
    # Q r^(r/(1-r)), r = zc/zeta (envelope solution, closed form); the SRS of the sampled
    # decaying sine by the ramp-invariant filter (Smallwood 1981) at 50 points per cycle.
    # Measured 0.2-0.5 % apart at Q = 10 (the envelope solution drops terms in zeta).
    f = 1000.0
    dt = 1 / (50 * f)
    zetas = np.array([0.005, 0.01, 0.025, 0.05, 0.1]) * (10.0 / q)
    gains = SS.srs_gain_damped_sine(zetas, q)
    for zc, gain in zip(zetas, gains, strict=True):
        t = np.arange(int(60 / (zc * 2 * np.pi * f * dt))) * dt
        x = np.exp(-zc * 2 * np.pi * f * t) * np.sin(2 * np.pi * f * t)
        assert S.srs(x, dt, [f], q)[0] == pytest.approx(gain, rel=0.01)
    # r = 1: Q/e; a steady sine (r -> 0) tends to Q
    assert SS.srs_gain_damped_sine(1 / (2 * q), q) == pytest.approx(q / math.e, rel=1e-12)
    assert SS.srs_gain_damped_sine(1e-9, q) == pytest.approx(q, rel=1e-6)
    with pytest.raises(InputError, match="zeta_input"):
        SS.srs_gain_damped_sine([0.01, 0.0], q)


@pytest.fixture(scope="module", params=[0, 1, 2], ids=lambda s: f"seed{s}")
def steep_pyro(request):
    return request.param, SS.synthesize_shock(PYRO_FALLING, seed=request.param,
                                              method="damped_sines")


def test_damped_sines_converge_on_the_steep_pyroshock(steep_pyro):
    # Issue goal: +/-1.5 dB at every grid frequency. Measured before issue 16's third
    # pass: 3.02 and 2.89 dB (seeds 0, 1); now 1.42, 1.32, 1.38 dB (seeds 0, 1, 2; the
    # last two after the minimax steps on trial 3).
    seed, res = steep_pyro
    assert res.converged and not res.warnings, (seed, res.max_error_db)
    achieved = S.srs(res.accel_g, res.dt_s, res.freq_hz, 10.0)  # independent recomputation
    err = 20 * np.log10(achieved / PYRO_FALLING.value_at(res.freq_hz))
    assert np.abs(err).max() <= 1.5 + 1e-9
    assert res.max_error_db == pytest.approx(np.abs(err).max(), abs=1e-9)
    # ends at rest: compensated decaying sinusoids (2x2 correction of each component)
    assert abs(res.final_velocity_m_s) <= 1e-9 * res.peak_velocity_m_s
    assert abs(res.final_displacement_m) <= 1e-9 * res.peak_displacement_m
    v, d = SS.integrate_accel(res.accel_g, res.dt_s)
    assert res.peak_displacement_m == pytest.approx(np.abs(d).max(), rel=1e-12)
    # the SRS at high fn tends to the peak input (Harris ch. 8): the peak stays near the
    # top-end target
    assert res.peak_accel_g <= PYRO_FALLING.value_at(res.freq_hz[-1]) * 10 ** (1.5 / 20)
    # lighter damping for a falling target: each sinusoid decays to 1/30 over its N
    # half-cycles (exp(-zeta pi N) = 1/30), which gives 4.4-6.4 times its amplitude at
    # its own frequency (srs_gain_damped_sine) where the plateau needs 1000/160 = 6.25
    z = res.wavelets.damping
    np.testing.assert_allclose(np.exp(-z * np.pi * res.wavelets.half_cycles), 1 / 30,
                               rtol=1e-12)


def test_steep_pyroshock_cross_checked_with_pyyeti(steep_pyro):
    pyyeti_srs = pytest.importorskip("pyyeti.srs")
    _, res = steep_pyro
    ref = pyyeti_srs.srs(res.accel_g, 1 / res.dt_s, res.freq_hz, 10.0, rolloff=None,
                         parallel="no", time="total")
    err = 20 * np.log10(ref / PYRO_FALLING.value_at(res.freq_hz))
    assert np.abs(err).max() <= 1.5 + 1e-6


def test_damped_sine_lighter_damping_only_for_falling_targets():
    # A rising/flat target keeps the 1e-3 decay and (15, 45) half-cycles (unchanged)
    res = SS.synthesize_shock(S.SrsProfile([100.0, 2000.0], [100.0, 100.0]), seed=0,
                              method="damped_sines", n_trials=1, max_iterations=1)
    z = res.wavelets.damping
    np.testing.assert_allclose(np.exp(-z * np.pi * res.wavelets.half_cycles), 1e-3,
                               rtol=1e-12)
    assert res.wavelets.half_cycles.max() <= 45  # fewer where the duration is short


@pytest.mark.parametrize("method", ["wavelets", "damped_sines"])
def test_steep_drop_is_reported_with_centred_errors(method):
    # -20 dB within one octave: not refused (see the next test), not reached by the
    # component methods (the free samples reach it: test below). Measured
    # before the minimax steps: 6.5 dB (wavelets), 7.5 dB (damped sines), seed 0; after:
    # 2.4-3.0 dB. The minimax steps end on the common scale that centres the errors in
    # dB (the SRS is homogeneous: SRS(c x) = |c| SRS(x)), so the worst excess and the
    # worst shortfall are equal.
    res = SS.synthesize_shock(DROP_20, seed=0, method=method, n_trials=1)
    assert not res.converged and res.warnings and "not converged" in res.warnings[0]
    assert res.error_db.max() == pytest.approx(-res.error_db.min(), abs=1e-6)
    assert res.max_error_db < 3.5
    assert abs(res.final_velocity_m_s) <= 1e-9 * res.peak_velocity_m_s
    assert abs(res.final_displacement_m) <= 1e-9 * res.peak_displacement_m


def test_steep_drop_no_ratio_bound_can_refuse_it():
    # Should srs_ratio_bound refuse the -20 dB octave? The target asks SRS(951 Hz) /
    # SRS(1903 Hz) = 18.6 dB; any record gives at most 20.2 dB (srs_ratio_bound, Q = 10),
    # and within +/-1.5 dB it needs only 15.6 dB: the pairwise bound leaves room. The
    # tightest bound of that kind holds every oscillator above the knee to its upper
    # tolerance at once: max y_951(T) subject to |y_j(t)| <= 10^(1.5/20) target_j for
    # all j above 951 Hz and all t (a linear program over the samples of a piecewise-
    # linear input; its dual is the best decomposition H_951 = sum_j G_j H_j). Its
    # optimum exceeds the lower tolerance 10^(-1.5/20) target_951, so no bound built
    # from these oscillators can prove the target out of reach. Measured: 120 g over a
    # 6.6 ms input (needed 84 g).
    fn = S.octave_grid(100.0, 2000.0, 12, anchor_hz=100.0)
    tgt = DROP_20.value_at(fn)
    dt = 1 / (20 * fn.max())
    floor = SS._check_reachable(fn, tgt, 10.0, dt, 1.5)  # raises InputError if refused
    assert floor is None or floor[0] < 1.5
    n, extra = 250, 100
    b, a = sdof_filter.coefficients(fn, 10.0, dt, output="abs_accel")
    imp = np.zeros(n + extra)
    imp[0] = 1.0

    def response_matrix(j):
        return toeplitz(lfilter(b[j], a[j], imp), np.zeros(n))

    knee = int(np.argmin(np.abs(fn - 951.0)))
    rows, bounds = [], []
    for j in range(knee + 1, fn.size):
        m = response_matrix(j)
        rows += [m, -m]
        bounds += [np.full(2 * m.shape[0], tgt[j] * 10 ** (1.5 / 20))]
    res = linprog(-response_matrix(knee)[n - 1], A_ub=np.vstack(rows),
                  b_ub=np.concatenate(bounds), bounds=(None, None), method="highs")
    assert res.status == 0
    assert -res.fun > tgt[knee] * 10 ** (-1.5 / 20) * 1.2



# --------------------------------------------------------------------------
# Synthesis from free samples (method="free_samples", section 13 of the method note)


@pytest.fixture(scope="module")
def drop_free():
    return SS.synthesize_shock(DROP_20, seed=0, method="free_samples")


def test_steep_drop_converges_from_free_samples(drop_free):
    # Issue goal: +/-1.5 dB at every grid frequency, now met on the -20 dB octave by the
    # linear program on the free samples (measured 1.45 dB after one program, seed 0).
    # The SRS is recomputed independently by the public `srs` (ramp-invariant filter,
    # Smallwood 1981; ISO 18431-4).
    res = drop_free
    assert res.method == "free_samples"
    assert res.converged and not res.warnings, res.max_error_db
    achieved = S.srs(res.accel_g, res.dt_s, res.freq_hz, 10.0)
    err = 20 * np.log10(achieved / DROP_20.value_at(res.freq_hz))
    assert np.abs(err).max() <= 1.5 + 1e-9
    assert res.max_error_db == pytest.approx(np.abs(err).max(), abs=1e-9)
    # no components: every sample is a variable
    assert res.wavelets.freq_hz.size == 0 and res.wavelets.amplitude_g.size == 0


def test_steep_drop_free_samples_cross_checked_with_pyyeti(drop_free):
    # Second opinion: pyyeti's `srs` (reference library on PyPI), no roll-off correction,
    # residual included (time="total"), as for the other steep targets.
    pyyeti_srs = pytest.importorskip("pyyeti.srs")
    res = drop_free
    ref = pyyeti_srs.srs(res.accel_g, 1 / res.dt_s, res.freq_hz, 10.0, rolloff=None,
                         parallel="no", time="total")
    err = 20 * np.log10(ref / DROP_20.value_at(res.freq_hz))
    assert np.abs(err).max() <= 1.5 + 1e-6


def test_free_samples_end_at_rest_and_hold_the_peak(drop_free):
    res = drop_free
    # starts and ends at 0 (bounds of the program), final velocity and displacement 0
    # (equality rows, then an exact least-norm correction): closed form of the integrals
    # of a piecewise-linear record (integrate_accel)
    assert res.accel_g[0] == 0.0 and res.accel_g[-1] == 0.0
    assert abs(res.final_velocity_m_s) <= 1e-9 * res.peak_velocity_m_s
    assert abs(res.final_displacement_m) <= 1e-9 * res.peak_displacement_m
    v, d = SS.integrate_accel(res.accel_g, res.dt_s)
    assert res.peak_velocity_m_s == pytest.approx(np.abs(v).max(), rel=1e-12)
    assert res.peak_displacement_m == pytest.approx(np.abs(d).max(), rel=1e-12)
    assert res.final_displacement_m == pytest.approx(d[-1], abs=1e-18)
    # |x_k| <= the top-end target in the program, times 1/sqrt(tau) <= 10^(tol/20) after
    # the final scale: the SRS above the grid tends to the peak input (Harris ch. 8), so
    # the record does not come out as 1000 g of noise above the grid
    top = DROP_20.value_at(res.freq_hz[-1])
    assert res.peak_accel_g <= top * 10 ** (1.5 / 20) * (1 + 1e-9)


def test_end_weights_are_the_integrals_of_the_record():
    # final velocity int a dt and displacement int (T - t) a dt of a piecewise-linear
    # record (closed form) against the step-by-step integration of integrate_accel
    rng = np.random.default_rng(3)
    x = rng.normal(size=257)
    dt = 1e-4
    wv, wd = SS._end_weights(x.size, dt)
    v, d = SS.integrate_accel(x, dt)
    assert wv @ x * 9.80665 == pytest.approx(v[-1], rel=1e-12, abs=1e-15)
    assert wd @ x * 9.80665 == pytest.approx(d[-1], rel=1e-10, abs=1e-18)


# A small target for the stroke checks (10 grid points, 641 samples: about 1 s CPU)
SMALL = S.SrsProfile([200.0, 500.0, 2000.0], [20.0, 100.0, 30.0])
SMALL_FN = S.octave_grid(200.0, 2000.0, 3, anchor_hz=200.0)


def test_free_samples_stroke_rows_and_refusal():
    free = SS.synthesize_shock(SMALL, SMALL_FN, method="free_samples")
    assert free.converged
    assert abs(free.final_displacement_m) <= 1e-9 * free.peak_displacement_m
    # Half the free record's stroke: the displacement rows |d_k| <= stroke 10^(-tol/20)
    # (the recursion of integrate_accel) hold it, and the SRS still converges
    half = 0.5 * free.peak_displacement_m
    held = SS.synthesize_shock(SMALL, SMALL_FN, method="free_samples", stroke_m=half)
    assert held.converged
    assert held.peak_displacement_m <= half
    _, d = SS.integrate_accel(held.accel_g, held.dt_s)
    assert np.abs(d).max() <= half
    achieved = S.srs(held.accel_g, held.dt_s, SMALL_FN, 10.0)
    assert np.abs(20 * np.log10(achieved / SMALL.value_at(SMALL_FN))).max() <= 1.5 + 1e-9
    # A stroke no record within the tolerance fits: refused, naming stroke_m
    with pytest.raises(InputError, match="stroke_m"):
        SS.synthesize_shock(SMALL, SMALL_FN, method="free_samples",
                            stroke_m=0.01 * free.peak_displacement_m)
