"""Ramp-invariant SDOF filters (qualplan.dynamics.sdof_filter)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate, signal

from qualplan.dynamics import sdof_filter as sf
from qualplan.dynamics.errors import InputError
from qualplan.dynamics.units import G0_M_S2


def _cont2discrete(fn, q, dt, output):
    zeta = 1.0 / (2.0 * q)
    wn = 2.0 * np.pi * fn
    den = (1.0, 2.0 * zeta * wn, wn * wn)
    num = (2.0 * zeta * wn, wn * wn) if output == "abs_accel" else (-G0_M_S2,)
    bd, ad, _ = signal.cont2discrete((num, den), dt, method="foh")
    return np.ravel(bd), np.ravel(ad)


def test_smallwood_coefficients_check_case_9():
    # Smallwood 1981 / ISO 18431-4 (from memory), = scipy 'foh' (recomputed)
    b, a = sf.coefficients([100.0], 10.0, 1e-4)
    np.testing.assert_allclose(b[0], [0.0037908042, 0.0026160496, -0.0024726832], atol=1e-9)
    np.testing.assert_allclose(a[0], [1.0, -1.989802342, 0.9937365126], atol=1e-9)


@pytest.mark.parametrize("fn", [5.0, 100.0, 1000.0, 4000.0])
def test_abs_accel_equals_scipy_foh(fn):
    # reference library scipy.signal.cont2discrete(method='foh') = ramp-invariant
    b, a = sf.coefficients([fn], 10.0, 1e-4)
    bd, ad = _cont2discrete(fn, 10.0, 1e-4, "abs_accel")
    np.testing.assert_allclose(b[0], bd, rtol=1e-9, atol=1e-13)
    np.testing.assert_allclose(a[0], ad, rtol=1e-12)


def test_rel_disp_check_case_9():
    # scipy cont2discrete 'foh' (recomputed): numerator -1 (input m/s^2) gives
    # b = [-1.6637e-9, -6.6431e-9, -1.6585e-9]; our input is in g, so x g0.
    b, a = sf.coefficients([100.0], 10.0, 1e-4, output="rel_disp")
    expected = np.array([-1.6637e-9, -6.6431e-9, -1.6585e-9]) * G0_M_S2
    np.testing.assert_allclose(b[0], expected, rtol=1e-4)
    np.testing.assert_allclose(a[0], [1.0, -1.989802342, 0.9937365126], atol=1e-9)


@pytest.mark.parametrize("fn, dt", [(20.0, 1e-4), (100.0, 1e-4), (1000.0, 1e-4), (10.0, 1e-3)])
def test_rel_disp_equals_scipy_foh(fn, dt):
    # reference library scipy.signal.cont2discrete(method='foh'); scipy builds its
    # matrix exponential in un-normalised time and is good to ~1e-8 only.
    b, a = sf.coefficients([fn], 10.0, dt, output="rel_disp")
    bd, ad = _cont2discrete(fn, 10.0, dt, "rel_disp")
    np.testing.assert_allclose(b[0], bd, rtol=1e-6)
    np.testing.assert_allclose(a[0], ad, rtol=1e-12)


def _closed_form_rel_disp_ld(fn, q, dt):
    """Closed form of the FOH (ramp-invariant) filter of -g0/(s^2 + 2 s wn zeta + wn^2).

    Partial fractions of H(s)/s^2, z-transform of the samples, times (z-1)^2/(T z)
    (Franklin, Powell & Workman, Digital Control, triangle-hold equivalent),
    evaluated in long double.
    """
    L = np.longdouble
    fn, T = L(fn), L(dt)
    z = 1 / (2 * L(q))
    wn = 2 * L(np.pi) * fn
    s = z * wn
    wd = wn * np.sqrt(1 - z * z)
    A, B = 1 / wn**2, -2 * s / wn**4
    C, D = -B, -1 / wn**2 + 4 * s * s / wn**4
    F = (D - C * s) / wd
    E = np.exp(-s * T)
    c, si = np.cos(wd * T), np.sin(wd * T)
    G = F * E * si - C * E * c
    c1, c2 = -2 * E * c, E * E
    b0 = A + (B / T) * (c1 + 1) + G / T
    b1 = A * c1 + (B / T) * (c2 - c1 - 1) - 2 * G / T
    b2 = A * c2 - (B / T) * c2 + G / T
    return np.array([float(-L(G0_M_S2) * v) for v in (b0, b1, b2)])


@pytest.mark.parametrize("fn, dt", [(20.0, 1e-4), (100.0, 1e-4), (300.0, 1e-4), (4000.0, 1e-4)])
def test_rel_disp_closed_form(fn, dt):
    # closed form (partial fractions + z-transform), long double
    b, _ = sf.coefficients([fn], 10.0, dt, output="rel_disp")
    np.testing.assert_allclose(b[0], _closed_form_rel_disp_ld(fn, 10.0, dt), rtol=1e-12)


def test_ramp_invariance_closed_form():
    # closed form: response of z to a unit ramp y'' = t [g] is
    # -g0 (A t + B + exp(-s t) (C cos wd t + F sin wd t)) (partial fractions of 1/(s^2 D(s)))
    fn, q, dt = 50.0, 10.0, 1e-3  # coarse: wn dt = 0.31
    t = np.arange(400) * dt
    z_num = sf.response(t, dt, [fn], q, output="rel_disp")[0]
    zeta = 1 / (2 * q)
    wn = 2 * np.pi * fn
    s = zeta * wn
    wd = wn * np.sqrt(1 - zeta**2)
    A, B = 1 / wn**2, -2 * s / wn**4
    C, D = -B, -1 / wn**2 + 4 * s * s / wn**4
    F = (D - C * s) / wd
    z_exact = -G0_M_S2 * (A * t + B + np.exp(-s * t) * (C * np.cos(wd * t) + F * np.sin(wd * t)))
    np.testing.assert_allclose(z_num, z_exact, rtol=0, atol=1e-12 * np.abs(z_exact).max())


def test_piecewise_linear_input_against_ode():
    # closed form reference: a very fine ODE integration (DOP853, rtol 1e-12) of
    # z'' + 2 zeta wn z' + wn^2 z = -g0 y''(t) with y'' linear between samples
    rng = np.random.default_rng(1)
    dt, n = 1e-3, 120
    x = rng.standard_normal(n)
    x[0] = 0.0
    t = np.arange(n) * dt
    fn, q = 60.0, 8.0
    zeta, wn = 1 / (2 * q), 2 * np.pi * fn

    def rhs(tt, s):
        u = np.interp(tt, t, x) * G0_M_S2
        return [s[1], -u - 2 * zeta * wn * s[1] - wn * wn * s[0]]

    sol = integrate.solve_ivp(rhs, (0, t[-1]), [0.0, 0.0], method="DOP853", t_eval=t,
                              rtol=1e-12, atol=1e-16, max_step=dt / 4)
    z_ref, v_ref = sol.y
    acc_ref = -(2 * zeta * wn * v_ref + wn * wn * z_ref) / G0_M_S2
    z = sf.response(x, dt, [fn], q, output="rel_disp")[0]
    pv = sf.response(x, dt, [fn], q, output="pseudo_vel")[0]
    acc = sf.response(x, dt, [fn], q, output="abs_accel")[0]
    np.testing.assert_allclose(z, z_ref, atol=1e-8 * np.abs(z_ref).max())
    np.testing.assert_allclose(pv, wn * z_ref, atol=1e-8 * np.abs(wn * z_ref).max())
    np.testing.assert_allclose(acc, acc_ref, atol=1e-7 * np.abs(acc_ref).max())


def test_sign_convention_static():
    # closed form: constant y'' = 1 g -> z = -g0/wn^2 (spring compressed), x'' = 1 g
    dt, fn = 1e-4, 200.0
    x = np.ones(20000)
    z = sf.response(x, dt, [fn], 10.0, output="rel_disp")[0, -1]
    acc = sf.response(x, dt, [fn], 10.0, output="abs_accel")[0, -1]
    assert z == pytest.approx(-G0_M_S2 / (2 * np.pi * fn) ** 2, rel=1e-9)
    assert acc == pytest.approx(1.0, rel=1e-9)


def test_vectorised_shape_and_rows_independent():
    rng = np.random.default_rng(2)
    x = rng.standard_normal(500)
    fn = np.array([10.0, 100.0, 1000.0])
    y = sf.response(x, 1e-4, fn, 10.0)
    assert y.shape == (3, 500)
    b, a = sf.coefficients(fn, 10.0, 1e-4)
    for i in range(3):  # reference library scipy.signal.lfilter
        np.testing.assert_allclose(y[i], signal.lfilter(b[i], a[i], x), rtol=1e-10, atol=1e-12)
    b, a = sf.coefficients(fn, 10.0, 1e-4, output="rel_disp")
    assert b.shape == a.shape == (3, 3)


def test_extremes_match_full_response():
    rng = np.random.default_rng(3)
    x = rng.standard_normal(300)
    fn = np.array([50.0, 500.0])
    b, a = sf.coefficients(fn, 10.0, 1e-4)
    ext = sf.run_extremes(x, b, a, [400, 40])
    for i, m in enumerate([400, 40]):
        y = signal.lfilter(b[i], a[i], np.concatenate([x, np.zeros(m)]))
        np.testing.assert_allclose(ext[i], [y[:300].max(), y[:300].min(),
                                            y[299:].max(), y[299:].min()], rtol=1e-10)


@pytest.mark.parametrize(
    "kwargs, match",
    [
        (dict(fn_hz=[6000.0], q=10, dt_s=1e-4), "Nyquist"),
        (dict(fn_hz=[100.0], q=0.5, dt_s=1e-4), "0.5"),
        (dict(fn_hz=[-1.0], q=10, dt_s=1e-4), "> 0"),
        (dict(fn_hz=[np.nan], q=10, dt_s=1e-4), "finite"),
        (dict(fn_hz=[100.0], q=10, dt_s=0.0), "dt_s"),
    ],
)
def test_bad_input(kwargs, match):
    with pytest.raises(InputError, match=match):
        sf.coefficients(**kwargs)


def test_bad_output_name():
    with pytest.raises(InputError, match="output"):
        sf.coefficients([100.0], 10, 1e-4, output="velocity")
    with pytest.raises(InputError, match="accel_g"):
        sf.response([0.0, np.nan], 1e-4, [100.0], 10)
