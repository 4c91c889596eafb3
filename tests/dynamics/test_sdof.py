"""SDOF frequency-domain responses (qualplan.dynamics.sdof)."""

import math
import warnings

import numpy as np
import pytest
from scipy import integrate

from qualplan.dynamics import sdof
from qualplan.dynamics.errors import AccuracyWarning, InputError

G0 = 9.80665
FLAT = ([20.0, 2000.0], [0.04, 0.04])
GEVS_QUAL = ([20.0, 50.0, 800.0, 2000.0], [0.026, 0.16, 0.16, 0.026])
WORKMANSHIP = ([20.0, 80.0, 500.0, 2000.0], [0.01, 0.04, 0.04, 0.01])


@pytest.mark.parametrize(
    "psd, fn, q, miles, exact, z_exact_mm",
    [
        # Miles 1954; exact by adaptive quadrature (recomputed)
        (FLAT, 100.0, 10.0, 7.9267, 7.9143, 0.19561),
        (GEVS_QUAL, 100.0, 10.0, 15.8533, 15.7381, 0.38897),
        (GEVS_QUAL, 300.0, 10.0, 27.4587, 27.4855, 0.07549),
        (GEVS_QUAL, 30.0, 10.0, 5.2325, 5.1485, 1.41266),
        (WORKMANSHIP, 200.0, 20.0, 15.8533, 15.8147, 0.09809),
    ],
)
def test_miles_versus_exact_domain_table(psd, fn, q, miles, exact, z_exact_mm):
    f, g = psd
    g_fn = np.exp(np.interp(np.log(fn), np.log(f), np.log(g)))
    assert sdof.miles_grms(fn, q, g_fn) == pytest.approx(miles, rel=5e-5)
    assert sdof.response_rms(f, g, [fn], q, output="abs_accel")[0] == pytest.approx(exact, rel=5e-5)
    z = sdof.response_rms(f, g, [fn], q, output="rel_disp")[0] * 1e3
    assert z == pytest.approx(z_exact_mm, rel=5e-5)


def test_miles_flat_psd_q10_within_a_few_percent():
    # Miles 1954 vs exact SDOF response, flat PSD, Q = 10: issue check "within a few %"
    fn = np.geomspace(40, 1000, 20)
    exact = sdof.response_rms(*FLAT, fn, 10.0, output="abs_accel")
    miles = sdof.miles_grms(fn, 10.0, 0.04)
    assert np.all(np.abs(miles / exact - 1) < 0.03)


def test_moments_against_scipy_quad():
    # reference library scipy.integrate.quad (adaptive, split at breakpoints and fn)
    f, g = GEVS_QUAL
    fn, q = 120.0, 15.0
    n = np.diff(np.log(g)) / np.diff(np.log(f))

    def psd(x):
        j = min(np.searchsorted(f, x, side="right") - 1, 2)
        return g[j] * (x / f[j]) ** n[j]

    def h2(x):
        r = x / fn
        return 1 / ((1 - r * r) ** 2 + (r / q) ** 2)

    pts = sorted(set(f) | {fn, fn * (1 - 1 / q), fn * (1 + 1 / q)})
    m = sdof.response_moments(f, g, [fn], q)
    for k, ours in ((0, m.m0[0]), (1, m.m1[0]), (2, m.m2[0]), (4, m.m4[0])):
        ref = sum(integrate.quad(lambda x, k=k: psd(x) * h2(x) * x**k, a, b, epsabs=0,
                                 epsrel=1e-12, limit=200)[0]
                  for a, b in zip(pts[:-1], pts[1:], strict=True))
        assert ours == pytest.approx(ref, rel=1e-7)


def test_quadrature_converged():
    # convergence: doubling the node density changes the moments by < 1e-7
    f, g = GEVS_QUAL
    fn = np.array([25.0, 100.0, 900.0, 1990.0])
    for q in (5.0, 10.0, 50.0):
        a = sdof.response_moments(f, g, fn, q)
        b = sdof.response_moments(f, g, fn, q, n_res=640, n_per_oct=192)
        for name in ("m0", "m2", "m4"):
            np.testing.assert_allclose(getattr(a, name), getattr(b, name), rtol=1e-7)


def test_infinite_white_band_limits():
    # closed form: for white noise over a very wide band the pseudo-acceleration
    # rms equals Miles and abs accel is Miles * sqrt(1 + 1/Q^2) (closed form)
    f, g = [0.01, 1e6], [0.04, 0.04]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        pa = sdof.response_rms(f, g, [100.0], 10.0, output="pseudo_accel")[0]
        aa = sdof.response_rms(f, g, [100.0], 10.0, output="abs_accel")[0]
    miles = math.sqrt(math.pi / 2 * 100 * 10 * 0.04)
    assert pa == pytest.approx(miles, rel=1e-5)
    assert aa == pytest.approx(miles * math.sqrt(1 + 1 / 100), rel=1e-3)  # tail ~ 1/f cut off


def test_zero_up_rate_narrow_band():
    # Rice (1944-45) n0+ = sqrt(m2/m0): 100.49 Hz for flat 0.04, fn 100, Q 10 (recomputed)
    m = sdof.response_moments(*FLAT, [100.0], 10.0)
    assert m.zero_up_rate_hz[0] == pytest.approx(100.49, abs=0.005)


def test_transfer_functions():
    # closed form: |H_a(fn)| = sqrt(1 + Q^2) ... = Q sqrt(1 + 1/Q^2); |H_pa(fn)| = Q;
    # H_z(0) = -g0 / wn^2 (static deflection, sign per sdof_filter's convention)
    assert sdof.transmissibility(100.0, 100.0, 10.0) == pytest.approx(math.sqrt(101))
    assert sdof.pseudo_accel_gain(100.0, 100.0, 10.0) == pytest.approx(10.0)
    h0 = sdof.rel_disp_transfer(1e-9, 100.0, 10.0)
    assert h0.real == pytest.approx(-G0 / (2 * math.pi * 100) ** 2)
    assert sdof.miles_rel_disp_rms_m(100.0, 10.0, 0.04) * 1e3 == pytest.approx(0.19690, rel=5e-5)


def test_outside_band_warns():
    with pytest.warns(AccuracyWarning, match="outside the PSD band"):
        sdof.response_moments(*FLAT, [10.0, 100.0], 10.0)


def test_bad_input():
    with pytest.raises(InputError, match="q="):
        sdof.response_rms(*FLAT, [100.0], 0.5)
    with pytest.raises(InputError, match="asd_g2_hz"):
        sdof.response_rms([20, 2000], [0.04, -1], [100.0], 10)
    with pytest.raises(InputError, match="freq_hz"):
        sdof.response_rms([2000, 20], [0.04, 0.04], [100.0], 10)
    with pytest.raises(InputError, match="fn_hz"):
        sdof.response_rms(*FLAT, [0.0], 10)
    with pytest.raises(InputError, match="output"):
        sdof.response_rms(*FLAT, [100.0], 10, output="velocity")


def test_moment_sensitivities_against_central_differences():
    # common practice (derivative check): d m_k / d ln G_j by central differences of
    # response_moments, step 1e-5 in ln G_j (truncation error ~1e-10 of m_k)
    f = np.array([20.0, 50.0, 80.0, 300.0, 800.0, 2000.0])
    g = np.array([0.02, 0.1, 0.05, 0.2, 0.08, 0.01])
    fn = np.geomspace(20.0, 2000.0, 12)
    s = sdof.moment_sensitivities(f, g, fn, 10.0)
    m = sdof.response_moments(f, g, fn, 10.0)
    np.testing.assert_allclose(s.m0, m.m0, rtol=1e-12)
    np.testing.assert_allclose(s.m2, m.m2, rtol=1e-12)
    h = 1e-5
    for j in range(f.size):
        up, dn = g.copy(), g.copy()
        up[j] *= math.exp(h)
        dn[j] *= math.exp(-h)
        mu, md = sdof.response_moments(f, up, fn, 10.0), sdof.response_moments(f, dn, fn, 10.0)
        np.testing.assert_allclose(s.dm0[:, j], (mu.m0 - md.m0) / (2 * h), rtol=1e-6,
                                   atol=1e-9 * m.m0.max())
        np.testing.assert_allclose(s.dm2[:, j], (mu.m2 - md.m2) / (2 * h), rtol=1e-6,
                                   atol=1e-9 * m.m2.max())
    # the derivatives with respect to all breakpoints sum to the moments (m_k is
    # homogeneous of degree 1 in G: scaling every G_j by e^h scales m_k by e^h)
    np.testing.assert_allclose(s.dm0.sum(axis=1), m.m0, rtol=1e-12)
