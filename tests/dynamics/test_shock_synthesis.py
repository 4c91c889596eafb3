"""Shock synthesis from an SRS (qualplan.dynamics.shock_synthesis)."""

from __future__ import annotations

import numpy as np
import pytest

from qualplan.dynamics import shock_synthesis as SS
from qualplan.dynamics import srs as S
from qualplan.dynamics.errors import InputError
from qualplan.dynamics.units import G0_M_S2

# A pyroshock-like target: +~7 dB/oct to a 1000 g plateau from 2 kHz (common practice shape)
PYRO = S.SrsProfile([100.0, 2000.0, 10000.0], [30.0, 1000.0, 1000.0])
# A shaker-shock target: 10 g at 10 Hz rising to 100 g at 100 Hz, flat to 2 kHz
SHAKER = S.SrsProfile([10.0, 100.0, 2000.0], [10.0, 100.0, 100.0])

#: Stated fraction: final velocity and displacement below this share of their peaks.
FINAL_SHARE = 1e-9


@pytest.fixture(scope="module")
def pyro():
    return SS.synthesize_shock(PYRO, seed=0)


@pytest.fixture(scope="module")
def shaker():
    return SS.synthesize_shock(SHAKER, seed=3)


@pytest.mark.parametrize("name", ["pyro", "shaker"])
def test_srs_within_tolerance_everywhere(name, request):
    res = request.getfixturevalue(name)
    profile = PYRO if name == "pyro" else SHAKER
    assert res.converged and not res.warnings
    # independent recomputation with the public SRS (ramp-invariant filter)
    got = S.srs(res.accel_g, res.dt_s, res.freq_hz, 10.0)
    err = 20 * np.log10(got / profile.value_at(res.freq_hz))
    assert np.abs(err).max() <= 1.5
    np.testing.assert_allclose(res.error_db, err, atol=1e-9)
    # grid: 1/12 octave from the first breakpoint to the last (default)
    np.testing.assert_allclose(res.freq_hz[1:] / res.freq_hz[:-1], 2 ** (1 / 12), rtol=1e-12)
    assert res.freq_hz[0] == profile.freq_hz[0]


def test_srs_cross_checked_with_pyyeti(pyro):
    # reference library pyyeti.srs.srs on the synthesised record
    pyyeti_srs = pytest.importorskip("pyyeti.srs")
    ref = pyyeti_srs.srs(pyro.accel_g, 1 / pyro.dt_s, pyro.freq_hz, 10.0, rolloff=None,
                         parallel="no", time="total")
    err = 20 * np.log10(ref / PYRO.value_at(pyro.freq_hz))
    assert np.abs(err).max() <= 1.5 + 1e-9


@pytest.mark.parametrize("name", ["pyro", "shaker"])
def test_final_velocity_and_displacement_zero(name, request):
    res = request.getfixturevalue(name)
    assert abs(res.final_velocity_m_s) < FINAL_SHARE * res.peak_velocity_m_s
    assert abs(res.final_displacement_m) < FINAL_SHARE * res.peak_displacement_m
    assert res.accel_g[0] == 0.0 and res.accel_g[-1] == 0.0
    # reported peaks agree with the arrays; closed-form integration of the record
    v, d = SS.integrate_accel(res.accel_g, res.dt_s)
    assert res.peak_accel_g == np.abs(res.accel_g).max()
    assert res.peak_velocity_m_s == pytest.approx(np.abs(v).max())
    assert res.peak_displacement_m == pytest.approx(np.abs(d).max())
    assert res.duration_s == pytest.approx((res.accel_g.size - 1) * res.dt_s)
    assert np.all(res.wavelets.half_cycles % 2 == 1)


def test_deterministic_for_a_seed(pyro):
    again = SS.synthesize_shock(PYRO, seed=0)
    np.testing.assert_array_equal(again.accel_g, pyro.accel_g)
    other = SS.synthesize_shock(PYRO, seed=1)
    assert not np.array_equal(other.accel_g, pyro.accel_g)
    gen = SS.synthesize_shock(PYRO, seed=np.random.default_rng(0))
    np.testing.assert_array_equal(gen.accel_g, pyro.accel_g)


def test_tighter_tolerance_and_coarser_grid():
    grid = S.octave_grid(100.0, 10000.0, 6, anchor_hz=100.0)
    res = SS.synthesize_shock(PYRO, grid, tolerance_db=1.0, seed=2)
    assert res.converged and res.max_error_db <= 1.0
    assert res.freq_hz.size == grid.size == res.wavelets.freq_hz.size


@pytest.mark.parametrize("n", [3, 5, 7, 9])
def test_odd_wavelet_zero_end_velocity_displacement(n):
    # closed form (recomputed): N odd -> zero end velocity and displacement (~1e-17);
    # here at 400 points per cycle the sampling residue is far below 1e-6 of the peaks
    f, dt = 100.0, 1 / 40000.0
    t = np.arange(int(n / (2 * f) / dt) + 3) * dt
    w = SS.wavelet(t, f, n, 1.0)
    v, d = SS.integrate_accel(w, dt)
    assert abs(v[-1]) < 1e-6 * np.abs(v).max()
    assert abs(d[-1]) < 1e-6 * np.abs(d).max()


def test_integrate_accel_closed_form():
    # closed form: constant 1 g -> v = g0 t, d = g0 t^2 / 2 (exact for linear input)
    dt = 1e-3
    t = np.arange(11) * dt
    v, d = SS.integrate_accel(np.ones(11), dt)
    np.testing.assert_allclose(v, G0_M_S2 * t, rtol=1e-12)
    np.testing.assert_allclose(d, G0_M_S2 * t**2 / 2, rtol=1e-12, atol=1e-18)
    # ramp a = t [g/s]: v = g0 t^2/2, d = g0 t^3/6, exact for piecewise-linear input
    v, d = SS.integrate_accel(t, dt)
    np.testing.assert_allclose(d, G0_M_S2 * t**3 / 6, rtol=1e-12, atol=1e-18)


@pytest.mark.parametrize("kwargs, match", [
    (dict(duration_s=0.01), "duration_s"),
    (dict(dt_s=1e-4), "sample rate"),
    (dict(tolerance_db=0.0), "tolerance_db"),
    (dict(freq_hz=[5.0, 100.0]), "inside the target band"),
    (dict(half_cycles=(4, 9)), "half_cycles"),
    (dict(q=0.4), "0.5"),
])
def test_bad_input(kwargs, match):
    with pytest.raises(InputError, match=match):
        SS.synthesize_shock(SHAKER, **kwargs)


def test_bad_target():
    with pytest.raises(InputError, match="target"):
        SS.synthesize_shock(42)
    with pytest.raises(InputError, match="half_cycles"):
        SS.wavelet([0.0], 100.0, 4)


def test_not_converged_is_reported_not_raised():
    res = SS.synthesize_shock(PYRO, tolerance_db=0.01, n_trials=1, max_iterations=2)
    assert not res.converged and res.warnings and "not converged" in res.warnings[0]
    assert res.max_error_db > 0.01
