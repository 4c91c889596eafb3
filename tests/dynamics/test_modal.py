"""Modal combination and peak-response estimates (qualplan.dynamics.modal)."""

import math
import warnings

import numpy as np
import pytest
from scipy import integrate, optimize

from qualplan.dynamics import extreme, modal, sdof
from qualplan.dynamics.errors import AccuracyWarning, InputError

G0 = 9.80665  # standard gravity [m/s^2] (CGPM 1901)


# ------------------------------------------------------------------- CQC rho

def _rho_equal_damping(r, z):
    # Der Kiureghian 1981 / Wilson, Der Kiureghian & Bayo 1981, equal damping (closed form)
    return 8 * z * z * (1 + r) * r ** 1.5 / ((1 - r * r) ** 2 + 4 * z * z * r * (1 + r) ** 2)


@pytest.mark.parametrize("r, z, expected", [
    # closed form evaluated by hand: r = 1.1, z = 0.05:
    # num = 8 * 0.0025 * 2.1 * 1.1^1.5 = 0.042 * 1.153690 = 0.0484550
    # den = 0.21^2 + 4 * 0.0025 * 1.1 * 2.1^2 = 0.0441 + 0.04851 = 0.09261
    (1.1, 0.05, 0.0484550 / 0.09261),
    (2.0, 0.05, None),
    (1.02, 0.02, None),
    (1.5, 0.10, None),
])
def test_cqc_equal_damping_closed_form(r, z, expected):
    rho = modal.cqc_coefficients([10.0, 10.0 * r], z)
    want = _rho_equal_damping(r, z) if expected is None else expected
    assert rho[0, 1] == pytest.approx(want, rel=1e-5)
    assert rho[1, 0] == rho[0, 1]
    assert rho[0, 0] == rho[1, 1] == 1.0


def _rho_white_noise(fi, fj, zi, zj):
    """Correlation of two modal displacement responses to white noise, by scipy quad.

    The definition Der Kiureghian (1981) derives his closed form from:
    rho = int Re(H_i conj(H_j)) dw / sqrt(int |H_i|^2 dw int |H_j|^2 dw),
    H(w) = 1 / (wn^2 - w^2 + 2 i z wn w).
    """
    wi, wj = 2 * math.pi * fi, 2 * math.pi * fj

    def h(w, wn, z):
        return 1.0 / (wn * wn - w * w + 2j * z * wn * w)

    def q(fun, cuts):
        edges = [0.0, *cuts, np.inf]
        return sum(integrate.quad(fun, a, b, limit=2000, epsabs=0, epsrel=1e-12)[0]
                   for a, b in zip(edges[:-1], edges[1:], strict=False))

    cuts = sorted({0.5 * wi, 2.0 * wi, 0.5 * wj, 2.0 * wj})
    cross = q(lambda w: (h(w, wi, zi) * np.conj(h(w, wj, zj))).real, cuts)
    ii = q(lambda w: abs(h(w, wi, zi)) ** 2, cuts)
    jj = q(lambda w: abs(h(w, wj, zj)) ** 2, cuts)
    return cross / math.sqrt(ii * jj)


@pytest.mark.parametrize("fi, fj, zi, zj", [
    (10.0, 11.0, 0.05, 0.05), (10.0, 12.0, 0.02, 0.05), (10.0, 10.5, 0.05, 0.10),
    (100.0, 230.0, 0.03, 0.07),
])
def test_cqc_unequal_damping_matches_white_noise_integral(fi, fj, zi, zj):
    # Der Kiureghian 1981: the closed form is exact for white-noise excitation
    rho = modal.cqc_coefficients([fi, fj], [zi, zj])
    assert rho[0, 1] == pytest.approx(_rho_white_noise(fi, fj, zi, zj), rel=1e-8)


def test_cqc_is_srss_far_apart_and_abs_identical():
    # property (issue 17, item 4): CQC -> SRSS for well-separated modes, -> ABS for identical
    peaks = np.array([3.0, 4.0, 12.0])
    far = modal.cqc_coefficients([10.0, 100.0, 1000.0], 0.02)
    assert modal.combine(peaks, "cqc", far) == pytest.approx(modal.combine(peaks, "srss"), rel=1e-3)
    same = modal.cqc_coefficients([50.0, 50.0, 50.0], 0.05)
    np.testing.assert_allclose(same, 1.0)
    abs_sum = modal.combine(peaks, "abs")
    assert modal.combine(peaks, "cqc", same) == pytest.approx(abs_sum, rel=1e-12)


# --------------------------------------------------------------- combinations

def test_combinations_by_hand_three_modes():
    # by hand: peaks (3, -4, 12): ABS = 3 + 4 + 12 = 19; SRSS = sqrt(9 + 16 + 144) = 13;
    # NRL = 12 + sqrt(9 + 16) = 17
    peaks = [3.0, -4.0, 12.0]
    assert modal.combine(peaks, "abs") == 19.0
    assert modal.combine(peaks, "srss") == pytest.approx(13.0, rel=1e-15)
    assert modal.combine(peaks, "nrl") == pytest.approx(17.0, rel=1e-15)
    # CQC by hand with rho_12 = 0.5, others 0: 169 + 2 * 0.5 * 3 * (-4) = 157
    rho = np.eye(3)
    rho[0, 1] = rho[1, 0] = 0.5
    assert modal.combine(peaks, "cqc", rho) == pytest.approx(math.sqrt(157.0), rel=1e-15)


def test_combine_bad_input_names_the_field():
    with pytest.raises(InputError, match="method"):
        modal.combine([1.0], "sum")
    with pytest.raises(InputError, match="rho"):
        modal.combine([1.0, 2.0], "cqc")
    with pytest.raises(InputError, match="rho"):
        modal.combine([1.0, 2.0], "cqc", np.eye(3))
    with pytest.raises(InputError, match=r"zeta\[1\]"):
        modal.cqc_coefficients([1.0, 2.0], [0.05, 0.0])
    with pytest.raises(InputError, match="zeta"):
        modal.cqc_coefficients([1.0, 2.0, 3.0], [0.05, 0.02])
    with pytest.raises(InputError, match=r"fn_hz\[0\]"):
        modal.cqc_coefficients([-1.0, 2.0], 0.05)


# ------------------------------------------------------------------ spectrum

def test_spectrum_response_per_mode_and_base_force():
    # SRS plateau 100 g from 100 to 1000 Hz, ramp +6 dB/oct below (by hand: 50 g at 50 Hz)
    f, a = [25.0, 100.0, 1000.0], [25.0, 100.0, 100.0]
    res = modal.spectrum_response(f, a, [50.0, 200.0, 600.0], 0.05, [1.0, 0.5, 0.2])
    np.testing.assert_allclose(res.accel_g, [50.0, 100.0, 100.0], rtol=1e-12)
    np.testing.assert_allclose(res.force_n, np.array([50.0, 50.0, 20.0]) * G0, rtol=1e-12)
    assert res.force_combined_n["abs"] == pytest.approx(120.0 * G0, rel=1e-12)
    assert res.force_combined_n["srss"] == pytest.approx(math.sqrt(5400.0) * G0, rel=1e-12)
    assert res.force_combined_n["nrl"] == pytest.approx((50.0 + math.sqrt(2900.0)) * G0, rel=1e-12)
    srss, cqc = res.force_combined_n["srss"], res.force_combined_n["cqc"]
    assert srss < cqc < res.force_combined_n["abs"]


def test_spectrum_response_warns_for_modes_outside_band():
    with pytest.warns(AccuracyWarning, match="outside the SRS band"):
        res = modal.spectrum_response([100.0, 1000.0], [50.0, 50.0], [50.0, 200.0], 0.05,
                                      [1.0, 1.0])
    assert list(res.in_band) == [False, True]
    assert res.force_n[0] == 0.0


# -------------------------------------------------------------------- random

FLAT = ([20.0, 2000.0], [0.04, 0.04])


def _sdof_abs_exact(f_lo, f_hi, w, fn, zeta):
    # exact integral of |H_a|^2 W for flat W, by scipy quad (reference library)
    def h2(f):
        r = f / fn
        return (1 + (2 * zeta * r) ** 2) / ((1 - r * r) ** 2 + (2 * zeta * r) ** 2)
    pts = [p for p in (0.5 * fn, fn, 2 * fn) if f_lo < p < f_hi]
    return math.sqrt(w * integrate.quad(h2, f_lo, f_hi, points=pts, limit=2000, epsrel=1e-12)[0])


def test_random_single_mode_exact_integral_and_miles():
    # domain check: flat 0.04 g^2/Hz 20-2000 Hz, fn 100 Hz, Q 10, exact abs accel 7.9143 g rms
    res = modal.random_response(*FLAT, [100.0], 0.05, [2.0])
    exact = _sdof_abs_exact(20.0, 2000.0, 0.04, 100.0, 0.05)
    assert res.mode_accel_rms_g[0] == pytest.approx(exact, rel=1e-7)
    assert res.mode_accel_rms_g[0] == pytest.approx(7.9143, abs=5e-5)
    assert res.accel_rms_g == pytest.approx(exact, rel=1e-7)
    assert res.force_rms_n == pytest.approx(2.0 * G0 * exact, rel=1e-7)
    # Miles 1954: sqrt(pi/2 fn Q W) = 7.9267 g for the same case (a band-limited
    # input reads slightly lower)
    miles = math.sqrt(math.pi / 2 * 100.0 * 10.0 * 0.04)
    assert miles == pytest.approx(7.9267, abs=5e-5)
    assert res.mode_accel_rms_g[0] == pytest.approx(miles, rel=2e-3)


def test_random_single_mode_unbounded_band_tends_to_miles():
    # closed form: int_0^inf |H_a|^2 df = (pi/2) fn Q (1 + 1/Q^2) (Miles 1954 plus the
    # damping term of the absolute acceleration); band 1e-4 fn .. 1e5 fn: truncation < 1e-5
    fn, q, w = 100.0, 25.0, 0.01
    res = modal.random_response([1e-2, 1e7], [w, w], [fn], 1 / (2 * q), [1.0])
    closed = math.sqrt(math.pi / 2 * fn * q * w * (1 + 1 / q ** 2))
    assert res.mode_accel_rms_g[0] == pytest.approx(closed, rel=1e-5)


def _two_mode_direct(psd_f, psd_w, fn, zeta, meff):
    """Direct frequency-domain integration of |sum m_k H_k|^2 W (scipy quad), base force [N]."""
    psd_f, psd_w = np.asarray(psd_f), np.asarray(psd_w)

    def w(f):
        i = min(np.searchsorted(psd_f, f, side="right") - 1, len(psd_f) - 2)
        n = math.log(psd_w[i + 1] / psd_w[i]) / math.log(psd_f[i + 1] / psd_f[i])
        return psd_w[i] * (f / psd_f[i]) ** n

    def integrand(f, p):
        s = 0j
        for fk, zk, mk in zip(fn, zeta, meff, strict=False):
            r = f / fk
            s += mk * (1 + 2j * zk * r) / (1 - r * r + 2j * zk * r)
        return abs(s) ** 2 * w(f) * f ** p

    out = []
    for p in (0, 2):
        tot = 0.0
        for a, b in zip(psd_f[:-1], psd_f[1:], strict=False):
            pts = [x for x in fn if a < x < b]
            tot += integrate.quad(integrand, a, b, args=(p,), points=pts or None, limit=4000,
                                  epsabs=0, epsrel=1e-11)[0]
        out.append(tot)
    return G0 * math.sqrt(out[0]), math.sqrt(out[1] / out[0])


def test_two_mode_random_matches_direct_integration():
    # invented sloped level: +3 dB/oct 20-80 Hz, 0.04 g^2/Hz to 350 Hz, -3 dB/oct to 2000 Hz
    psd_f = [20.0, 80.0, 350.0, 2000.0]
    psd_w = [0.01, 0.04, 0.04, 0.04 * 350.0 / 2000.0]
    fn, zeta, meff = [150.0, 200.0], [0.05, 0.03], [1.2, 0.8]
    res = modal.random_response(psd_f, psd_w, fn, zeta, meff)
    force, nu0 = _two_mode_direct(psd_f, psd_w, fn, zeta, meff)
    assert res.force_rms_n == pytest.approx(force, rel=1e-7)
    assert res.nu0_hz == pytest.approx(nu0, rel=1e-7)
    # close, same-sign modes: coherent total exceeds the SRSS of modal rms
    assert res.force_rms_n > 1.02 * res.force_srss_rms_n
    # per-mode rms agrees with the SDOF exact integral of the core (abs_accel)
    for k in range(2):
        sd = sdof.response_rms(psd_f, psd_w, [fn[k]], 1 / (2 * zeta[k]), output="abs_accel")[0]
        assert res.mode_accel_rms_g[k] == pytest.approx(sd, rel=1e-7)


def test_random_far_apart_modes_close_to_srss_and_residual_mass():
    res = modal.random_response(*FLAT, [60.0, 900.0], 0.05, [1.0, 1.0])
    assert res.force_rms_n == pytest.approx(res.force_srss_rms_n, rel=0.02)
    # residual mass alone: rigid, force rms = m g0 g_rms of the input (exact for a flat band:
    # g rms = sqrt(0.04 x 1980) = 8.8994 g)
    rigid = modal.random_response(*FLAT, [100.0], 0.05, [0.0], residual_kg=3.0)
    assert rigid.force_rms_n == pytest.approx(3.0 * G0 * math.sqrt(0.04 * 1980.0), rel=1e-9)


def test_random_bad_input():
    with pytest.raises(InputError, match="meff_kg"):
        modal.random_response(*FLAT, [100.0, 200.0], 0.05, [1.0])
    with pytest.raises(InputError, match=r"meff_kg\[0\]"):
        modal.random_response(*FLAT, [100.0], 0.05, [-1.0])
    with pytest.raises(InputError, match="residual_kg"):
        modal.random_response(*FLAT, [100.0], 0.05, [1.0], residual_kg=-1.0)


# ---------------------------------------------------------------------- sine

def test_sine_single_mode_peak_transmissibility():
    # the peak of |H_a| over frequency, found by scipy's bounded scalar minimiser
    # (reference library), times the constant 1.5 g input
    zeta = 0.04
    best = optimize.minimize_scalar(
        lambda r: -math.sqrt((1 + (2 * zeta * r) ** 2) / ((1 - r * r) ** 2 + (2 * zeta * r) ** 2)),
        bounds=(0.9, 1.1), method="bounded", options={"xatol": 1e-12})
    res = modal.sine_response([5.0, 500.0], [1.5, 1.5], [80.0], zeta, [2.0])
    assert res.mode_accel_g[0] == pytest.approx(-1.5 * best.fun, rel=1e-6)
    assert res.mode_freq_hz[0] == pytest.approx(80.0 * best.x, rel=2e-3)
    assert res.force_n == pytest.approx(2.0 * G0 * res.mode_accel_g[0], rel=1e-12)


def test_sine_constant_displacement_band_and_step():
    # 0.5 in double amplitude below the crossover with 10 g: 19.78 Hz (domain check,
    # closed form a = (2 pi f)^2 x 0.00635 m / g0); mode far above the band sees ~ the input
    f_x = math.sqrt(10.0 * G0 / 0.00635) / (2 * math.pi)
    assert f_x == pytest.approx(19.78, abs=0.005)
    a_lo = (2 * math.pi * 5.0) ** 2 * 0.00635 / G0
    res = modal.sine_response([5.0, f_x, 100.0], [a_lo, 10.0, 10.0], [2000.0], 0.05, [1.0])
    r = 100.0 / 2000.0
    h = math.sqrt((1 + (0.1 * r) ** 2) / ((1 - r * r) ** 2 + (0.1 * r) ** 2))
    assert res.mode_accel_g[0] == pytest.approx(10.0 * h, rel=1e-9)
    # a step: 2 g to 50 Hz, 1 g above; mode at 60 Hz peaks at its resonance with 1 g input
    res = modal.sine_response([5.0, 50.0, 50.0, 500.0], [2.0, 2.0, 1.0, 1.0], [60.0], 0.05, [1.0])
    assert res.mode_freq_hz[0] == pytest.approx(60.0, rel=0.01)
    with pytest.raises(InputError, match="freq_hz"):
        modal.sine_response([5.0, 5.0, 500.0], [2.0, 1.0, 1.0], [60.0], 0.05, [1.0])


# ---------------------------------------------------------------- statistics

def test_sigma_levels_gaussian_table():
    # standard normal table: P(|x| <= k sigma) = 0.682689, 0.954500, 0.997300
    levels = modal.sigma_levels(2.5)
    assert [s.k for s in levels] == [1, 2, 3]
    assert [s.value for s in levels] == [2.5, 5.0, 7.5]
    for s, p in zip(levels, (0.682689, 0.954500, 0.997300), strict=False):
        assert s.probability == pytest.approx(p, abs=1e-6)
    with pytest.raises(InputError, match="rms"):
        modal.sigma_levels(-1.0)


@pytest.mark.parametrize("nu0, t, u", [
    # Davenport 1964: u = sqrt(2 ln(nu0 T)) + 0.5772 / sqrt(2 ln(nu0 T)), evaluated by hand
    (100.0, 10.0, 3.8722),       # nu0 T = 1e3
    (100.0, 100.0, 4.4264),      # 1e4
    (250.0, 400.0, 4.9188),      # 1e5
    (1000.0, 1000.0, 5.3663),    # 1e6
])
def test_davenport_peak_factor(nu0, t, u):
    assert modal.peak_factor(nu0, t) == pytest.approx(u, abs=5e-5)
    # one implementation: the ERS peak factor gives the same number from the count
    assert float(extreme.peak_factor(nu0 * t)) == modal.peak_factor(nu0, t)


def test_peak_factor_bad_input():
    with pytest.raises(InputError, match="duration_s"):
        modal.peak_factor(100.0, 0.0)
    with pytest.raises(InputError, match="nu0_hz"):
        modal.peak_factor(-1.0, 10.0)
    with pytest.raises(InputError, match="exceed 1"):
        modal.peak_factor(0.5, 1.0)


# ----------------------------------------------------------------- Steinberg

def test_steinberg_allowable_by_hand():
    # Steinberg 3rd ed. (constants from memory): Z = 0.00022 B / (c h r sqrt(L)) [in];
    # B = 6 in, L = 1 in, h = 0.062 in, c = 1, r = 1 -> 0.00022 x 6 / 0.062 = 0.021290 in
    z = modal.steinberg_allowable_displacement_m(6 * 0.0254, 1 * 0.0254, 0.062 * 0.0254)
    assert z / 0.0254 == pytest.approx(0.0212903, rel=1e-5)
    # c = 2.25 (leadless chip carrier), r = 0.707, L = 0.5 in:
    # 0.00132 / (2.25 x 0.062 x 0.707 x 0.70711)
    z = modal.steinberg_allowable_displacement_m(0.1524, 0.0127, 0.062 * 0.0254, c=2.25, r=0.707)
    assert z / 0.0254 == pytest.approx(0.00132 / (2.25 * 0.062 * 0.707 * math.sqrt(0.5)), rel=1e-9)


def test_steinberg_check_three_sigma():
    # Steinberg: z_rms = 9.8 G / fn^2 [in] (9.78 with g0 = 386.09 in/s^2): fn 250 Hz, 12 g rms
    chk = modal.steinberg_check(250.0, 12.0, 0.1524, 0.0254, 0.062 * 0.0254)
    assert chk.z_rms_m / 0.0254 == pytest.approx(9.7797 * 12.0 / 250.0 ** 2, rel=1e-4)
    assert chk.z_3sigma_m == pytest.approx(3 * chk.z_rms_m)
    assert chk.ratio == pytest.approx(chk.z_allow_m / chk.z_3sigma_m)
    assert chk.passes is (chk.ratio >= 1.0)
    with pytest.raises(InputError, match="board_thickness_m"):
        modal.steinberg_check(250.0, 12.0, 0.15, 0.025, 0.0)


def test_no_warning_inside_band():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        modal.spectrum_response([10.0, 1000.0], [20.0, 20.0], [100.0], 0.05, [1.0])


# ---------------------------------------------------- response quantity per modal coordinate

def test_quantity_single_mode_is_the_sdof_relative_displacement():
    # gamma = phi = 1: the SDOF relative displacement z rms (exact integral of the core,
    # and Miles' z_rms for the domain case: 0.19561 mm exact, flat 0.04 g^2/Hz, fn 100, Q 10)
    res = modal.quantity_random_response(*FLAT, [100.0], 0.05, [1.0], [1.0])
    z = sdof.response_rms(*FLAT, [100.0], 10.0, output="rel_disp")[0]
    assert res.rms == pytest.approx(z, rel=1e-7)
    assert res.rms * 1e3 == pytest.approx(0.19561, abs=5e-6)
    # linear in phi and gamma
    res2 = modal.quantity_random_response(*FLAT, [100.0], 0.05, [-2.0], [3.0])
    assert res2.rms == pytest.approx(6.0 * z, rel=1e-12)


def test_quantity_two_modes_matches_direct_integration():
    psd_f, psd_w = [20.0, 80.0, 350.0, 2000.0], [0.01, 0.04, 0.04, 0.007]
    fn, zeta, gamma, phi = [150.0, 200.0], [0.05, 0.03], [1.1, -0.9], [30.0, 45.0]
    res = modal.quantity_random_response(psd_f, psd_w, fn, zeta, gamma, phi)

    def w(f):
        i = min(np.searchsorted(psd_f, f, side="right") - 1, len(psd_f) - 2)
        n = math.log(psd_w[i + 1] / psd_w[i]) / math.log(psd_f[i + 1] / psd_f[i])
        return psd_w[i] * (f / psd_f[i]) ** n

    def integrand(f):
        om = 2 * math.pi * f
        s = sum(-g * p * G0 / ((2 * math.pi * fk) ** 2 - om * om + 2j * zk * 2 * math.pi * fk * om)
                for fk, zk, g, p in zip(fn, zeta, gamma, phi, strict=True))
        return abs(s) ** 2 * w(f)

    tot = sum(integrate.quad(integrand, a, b, points=[x for x in fn if a < x < b] or None,
                             limit=4000, epsabs=0, epsrel=1e-11)[0]
              for a, b in zip(psd_f[:-1], psd_f[1:], strict=True))
    assert res.rms == pytest.approx(math.sqrt(tot), rel=1e-7)


def test_quantity_spectrum_peaks_by_hand():
    # R = phi gamma SRS g0 / (2 pi fn)^2: 23535.96 / 394784.18 = 0.059617 (by hand)
    r = modal.quantity_spectrum_peaks([50.0], [100.0], [1.2], [40.0])
    assert r[0] == pytest.approx(40 * 1.2 * 50 * 9.80665 / (2 * math.pi * 100) ** 2, rel=1e-12)
    assert r[0] == pytest.approx(0.059617, abs=5e-7)
    with pytest.raises(InputError, match="phi"):
        modal.quantity_spectrum_peaks([50.0, 60.0], [100.0, 200.0], [1.2, 1.0], [40.0])
