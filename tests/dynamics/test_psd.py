"""Tests of qualplan.dynamics.psd (PSD breakpoint profiles)."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate

from qualplan.dynamics import compression, psd
from qualplan.dynamics.errors import InputError

# Published profiles: breakpoints and printed overall g rms (standards named per entry).
PUBLISHED = {
    # GSFC-STD-7000A/B (GEVS) Table 2.4-3, component qualification/protoflight, printed 14.1
    "gevs_qual": (([20, 50, 800, 2000], [0.026, 0.16, 0.16, 0.026]), 14.1, 14.1356),
    # GSFC-STD-7000A/B (GEVS) Table 2.4-3, acceptance, printed 10.0
    "gevs_acceptance": (([20, 50, 800, 2000], [0.013, 0.08, 0.08, 0.013]), 10.0, 9.9954),
    # NASA-STD-7001B minimum workmanship (= GEVS Table 2.4-2), printed 6.8
    "workmanship": (([20, 80, 500, 2000], [0.01, 0.04, 0.04, 0.01]), 6.8, 6.7842),
    # MIL-STD-810H Method 514.8 Annex E Category 24 minimum integrity, printed 7.7
    "mil810h_min_integrity": (([20, 1000, 2000], [0.04, 0.04, 0.01]), 7.7, 7.6942),
    # MIL-STD-810H Method 514.8 Annex C Category 4 US highway truck, vertical, printed 1.04
    "mil810h_truck_vertical": (([10, 40, 500], [0.015, 0.015, 0.00015]), 1.04, 1.0429),
    # same, transverse, printed 0.204
    "mil810h_truck_transverse": (
        ([10, 20, 30, 78, 79, 120, 500],
         [0.00013, 0.00065, 0.00065, 0.00002, 0.00019, 0.00019, 0.00001]), 0.204, 0.2035),
    # same, longitudinal, printed 0.740
    "mil810h_truck_longitudinal": (
        ([10, 20, 120, 121, 200, 240, 340, 500],
         [0.0065, 0.0065, 0.0002, 0.003, 0.003, 0.0015, 0.00003, 0.00015]), 0.740, 0.7402),
    # NAVMAT P-9492 ESS, printed 6.06
    "navmat_p9492": (([20, 80, 350, 2000], [0.01, 0.04, 0.04, 0.007]), 6.06, 6.0582),
}


@pytest.mark.parametrize("name", sorted(PUBLISHED))
def test_grms_published_profiles(name):
    # sources named in PUBLISHED; printed values are rounded: within 1 % of print, and the
    # value recomputed in closed form within half a unit of its last digit (1e-4 g)
    (f, a), printed, recomputed = PUBLISHED[name]
    g = psd.grms(f, a)
    assert g == pytest.approx(printed, rel=0.01)
    assert g == pytest.approx(recomputed, abs=0.5e-4)


def test_n_minus_one_segment_area():
    # closed form (n = -1 segment, log form): 0.04 x 500 x ln 4 = 27.725887 g^2
    a = psd.segment_mean_square_g2([500, 2000], [0.04, 0.01])
    assert a[0] == pytest.approx(0.04 * 500 * math.log(4.0), rel=1e-12)
    assert a[0] == pytest.approx(27.725887, abs=5e-7)


def test_gevs_qual_acceptance_ratio():
    # GSFC-STD-7000 Table 2.4-3 (closed form): qual/acceptance differ by x2 in PSD
    # -> sqrt(2) in g rms
    q = psd.grms(*PUBLISHED["gevs_qual"][0])
    a = psd.grms(*PUBLISHED["gevs_acceptance"][0])
    assert q / a == pytest.approx(math.sqrt(2), rel=1e-12)


@pytest.mark.parametrize(
    ("name", "v_rms", "d_rms"),
    [
        # closed form, recomputed (closed form and adaptive quadrature agree to 1e-8)
        ("gevs_qual", 0.11031, 0.38192e-3),
        ("workmanship", 0.05294, 0.19432e-3),
        ("mil810h_min_integrity", 0.06930, 0.32069e-3),
    ],
)
def test_velocity_displacement(name, v_rms, d_rms):
    f, a = PUBLISHED[name][0]
    assert psd.velocity_rms_m_s(f, a) == pytest.approx(v_rms, rel=1e-4)
    assert psd.displacement_rms_m(f, a) == pytest.approx(d_rms, rel=1e-4)


def test_shaker_demand_gevs():
    # closed form; 3-sigma clipping is common practice: 6 sigma p-p 2.2915 mm for GEVS qual
    d = psd.shaker_demand(*PUBLISHED["gevs_qual"][0])
    assert d.displacement_pk_pk_m == pytest.approx(2.2915e-3, rel=1e-4)
    assert d.displacement_peak_m == pytest.approx(3 * 0.38192e-3, rel=1e-4)
    assert d.accel_peak_g == pytest.approx(3 * 14.1356, rel=1e-5)


@st.composite
def random_profiles(draw):
    n = draw(st.integers(2, 8))
    steps = draw(st.lists(st.floats(0.02, 1.0), min_size=n - 1, max_size=n - 1))
    f0 = draw(st.floats(1.0, 100.0))
    f = f0 * 10.0 ** np.concatenate(([0.0], np.cumsum(steps)))
    a = 10.0 ** np.array(draw(st.lists(st.floats(-6.0, 1.0), min_size=n, max_size=n)))
    return f, a


def _quad(f, a, k):
    # fine numerical integration in log-frequency (x = ln f), 2001 points per segment, Simpson
    tot = 0.0
    for i in range(f.size - 1):
        x = np.linspace(np.log(f[i]), np.log(f[i + 1]), 2001)
        ff = np.clip(np.exp(x), f[i], f[i + 1])
        y = psd.asd_at(f, a, ff) * ff ** (k + 1)
        tot += integrate.simpson(y, x=x)
    return tot


@settings(max_examples=40, deadline=None)
@given(random_profiles())
def test_closed_form_vs_numerical(p):
    # closed form vs fine numerical integration (Simpson on 2001 points per segment in ln f)
    f, a = p
    assert psd.grms(f, a) ** 2 == pytest.approx(_quad(f, a, 0.0), rel=1e-8)
    g0 = 9.80665
    v2 = (psd.velocity_rms_m_s(f, a) * 2 * math.pi / g0) ** 2
    assert v2 == pytest.approx(_quad(f, a, -2.0), rel=1e-8)
    d2 = (psd.displacement_rms_m(f, a) * (2 * math.pi) ** 2 / g0) ** 2
    assert d2 == pytest.approx(_quad(f, a, -4.0), rel=1e-8)


def test_scaling():
    # closed form: +3 dB on PSD = x1.995 PSD = x1.4125 g rms; scale_to_grms hits the target
    f, a = PUBLISHED["gevs_acceptance"][0]
    f2, a2 = psd.scale_db(f, a, 3.0)
    assert psd.grms(f2, a2) / psd.grms(f, a) == pytest.approx(10 ** (3 / 20), rel=1e-12)
    f3, a3 = psd.scale_to_grms(f, a, 6.8)
    assert psd.grms(f3, a3) == pytest.approx(6.8, rel=1e-12)
    np.testing.assert_allclose(psd.slopes_db_per_oct(f3, a3), psd.slopes_db_per_oct(f, a))


def test_from_plateau_gevs():
    # GSFC-STD-7000 text: +6 dB/oct 20-50, 0.16 plateau 50-800, -6 dB/oct 800-2000; literally
    # that is 0.02576 at the ends and 14.130 g rms (slopes taken at face value; the printed
    # rounded breakpoints give 14.1356) - closed form
    f, a = psd.from_plateau(0.16, (50, 800), low_hz=20, low_slope_db_oct=6, high_hz=2000,
                            high_slope_db_oct=-6)
    np.testing.assert_allclose(f, [20, 50, 800, 2000])
    assert a[0] == pytest.approx(0.16 * 10 ** (-6 * math.log2(2.5) / 10), rel=1e-12)
    np.testing.assert_allclose(psd.slopes_db_per_oct(f, a), [6, 0, -6], atol=1e-12)
    with pytest.raises(InputError, match="together"):
        psd.from_plateau(0.16, (50, 800), low_hz=20)


def test_resample_and_profile_object():
    # closed form: log-log interpolation points (recomputed)
    p = psd.PsdProfile(*PUBLISHED["workmanship"][0])
    np.testing.assert_allclose(psd.resample(p.freq_hz, p.asd_g2_hz, [10, 40, 1000, 3000]),
                               [0.0, 0.02, 0.02, 0.0], rtol=1e-12)
    assert p.grms == pytest.approx(6.7842, rel=5e-5)
    assert p.scaled_db(3.0).grms == pytest.approx(6.7842 * 10 ** (3 / 20), rel=5e-5)
    with pytest.raises(ValueError):
        p.freq_hz[0] = 1.0  # read-only arrays
    f, a = p
    assert psd.PsdProfile(f, a) == p and hash(psd.PsdProfile(f, a)) == hash(p)


@pytest.mark.parametrize(
    ("f", "a", "match"),
    [
        ([20, 50, 40], [0.01, 0.01, 0.01], r"freq_hz\[2\].*strictly increasing"),
        ([20, 50, 50], [0.01, 0.01, 0.01], r"freq_hz\[2\].*strictly increasing"),
        ([20, 50], [0.01, 0.0], r"asd_g2_hz\[1\].*> 0"),
        ([20, 50], [-0.01, 0.01], r"asd_g2_hz\[0\].*> 0"),
        ([20, 50], [0.01, float("nan")], r"asd_g2_hz\[1\].*finite"),
        ([20], [0.01], "at least 2"),
    ],
)
def test_bad_breakpoints(f, a, match):
    # common practice: clear InputError naming the field and value
    with pytest.raises(InputError, match=match):
        psd.grms(f, a)
    with pytest.raises(InputError, match=match):
        psd.PsdProfile(f, a)


# ---------------------------------------------------------------------------------------------
# Envelope and simplification
# ---------------------------------------------------------------------------------------------


def test_envelope_of_published_profiles():
    # closed form: GEVS qual is above workmanship everywhere except where workmanship's
    # +3 dB/oct ramp crosses the GEVS +6 dB/oct ramp (0.01 (f/20) = 0.026 (f/20)^2.0 ...)
    q = PUBLISHED["gevs_qual"][0]
    w = PUBLISHED["workmanship"][0]
    f, a = psd.envelope([q, w])
    grid = np.geomspace(20, 2000, 5000)
    env = psd.asd_at(f, a, grid)
    mx = np.maximum(psd.asd_at(*q, grid), psd.asd_at(*w, grid))
    np.testing.assert_allclose(env, mx, rtol=1e-12)
    # GEVS qual at 20 Hz (0.026) is above workmanship (0.01): no crossing below 50 Hz
    assert psd.grms(f, a) == pytest.approx(psd.grms(*q), rel=1e-12)
    # envelope of qual and acceptance is qual (x2 everywhere, GEVS)
    f2, a2 = psd.envelope([q, PUBLISHED["gevs_acceptance"][0]])
    np.testing.assert_allclose(f2, q[0])
    np.testing.assert_allclose(a2, q[1])


def _measured_like(seed, n=4000):
    # an invented "measured" response PSD: GEVS-shaped input, 3-4 modes, chi-square(64) noise
    rng = np.random.default_rng(seed)
    f = np.linspace(20, 2000, n)
    base = psd.asd_at([20, 50, 800, 2000], [0.026, 0.16, 0.16, 0.026], f)
    g = 0.3 * base
    for fn, q, w in ((150, 15, 0.5), (420, 20, 0.3), (900, 25, 0.2), (1500, 10, 0.1)):
        r = f / fn
        g = g + w * base * (1 + (r / q) ** 2) / ((1 - r ** 2) ** 2 + (r / q) ** 2)
    return f, g * rng.chisquare(64, n) / 64


def test_simplify_is_conservative_and_reports_excess():
    # closed form checks of the contract: <= N points, never below the input at any input line,
    # excess_db = 20 log10(grms_out / grms_in) (recomputed independently here)
    f, g = _measured_like(1)
    r = psd.simplify_report(f, g, 12)
    assert r.freq_hz.size <= 12
    assert r.freq_hz[0] == f[0] and r.freq_hz[-1] == f[-1]
    assert np.all(psd.asd_at(r.freq_hz, r.asd_g2_hz, f) >= g)
    assert r.min_margin_db >= 0.0
    g_in = psd.grms(f, g)
    g_out = psd.grms(r.freq_hz, r.asd_g2_hz)
    assert r.excess_db == pytest.approx(20 * math.log10(g_out / g_in), abs=1e-12)
    # common practice target: a 12-point envelope of a 4-mode response within ~3 dB g rms
    assert r.excess_db < 3.0
    fs, as_ = psd.simplify(f, g, 12)
    np.testing.assert_array_equal(fs, r.freq_hz)


def test_simplify_more_points_never_worse_much():
    # closed form: the optimum is non-increasing in N; allow 0.05 dB of search noise
    f, g = _measured_like(2, n=800)
    ex = [psd.simplify_report(f, g, n).excess_db for n in (4, 6, 9, 12)]
    assert all(b <= a + 0.05 for a, b in zip(ex, ex[1:], strict=False))
    assert ex[-1] < ex[0]


def test_simplify_exact_when_few_points():
    # closed form: a profile with <= N breakpoints is returned as is (collinear points dropped)
    f, a = psd.simplify([20, 50, 100, 800, 2000], [0.026, 0.16, 0.16, 0.16, 0.026], 4)
    np.testing.assert_allclose(f, [20, 50, 800, 2000])
    np.testing.assert_allclose(a, [0.026, 0.16, 0.16, 0.026])


def test_simplify_matches_exhaustive_search_small():
    # closed form reference: exhaustive search over every choice of interior breakpoints at the
    # data frequencies, each with its optimal values (same convex program), on rough 14-line
    # data; our search must be within 0.35 dB g rms of that optimum (see docs/methods/psd.md)
    import itertools

    from qualplan.dynamics import _loglog

    for seed in range(3):
        rng = np.random.default_rng(200 + seed)
        m = 14
        f = np.geomspace(20, 2000, m)
        g = 10 ** (rng.normal(-2, 0.4, m) + np.sin(np.arange(m) / 2.0))
        x, d = np.log(f), np.log(g)
        best = np.inf
        for comb in itertools.combinations(range(1, m - 1), 2):
            idx = np.array((0, *comb, m - 1))
            y = _loglog._optimise_values(x, d, idx, np.full(4, d.max()))
            assert np.all(psd.asd_at(f[idx], np.exp(y), f) >= g * (1 - 1e-9))
            best = min(best, float(np.sum(_loglog._areas(x[idx[:-1]], y[:-1], x[idx[1:]],
                                                         y[1:]))))
        r = psd.simplify_report(f, g, 4)
        gap_db = 10 * math.log10(r.grms_result ** 2 / best)
        assert -1e-6 <= gap_db < 0.35


@pytest.mark.parametrize(
    ("n", "match"), [(1, ">= 2"), (0, ">= 2"), (2.5, "integer"), (True, "integer")]
)
def test_simplify_bad_points(n, match):
    # common practice: clear errors
    with pytest.raises(InputError, match=match):
        psd.simplify([20, 50, 100], [0.01, 0.02, 0.01], n)


# ---------------------------------------------------------------------------------------------
# check_against
# ---------------------------------------------------------------------------------------------


def test_check_against_pass_and_fail():
    # closed form: lines at exactly the spec pass with 0 dB deviation and g rms equal to the
    # exact one within the trapezoid error; a +4 dB line fails a +/-3 dB band
    spec = PUBLISHED["gevs_qual"][0]
    f = np.arange(10.0, 2100.0, 0.5)
    a = psd.asd_at(*spec, f)
    a = np.where(a > 0, a, 1e-6)
    r = psd.check_against(f, a, *spec)
    assert r.passed and r.grms_pass and r.fraction_in_tolerance == 1.0
    assert r.n_outside_band == int(((f < 20) | (f > 2000)).sum())
    assert r.grms_spec == pytest.approx(14.1356, abs=1e-4)  # GSFC-STD-7000 Table 2.4-3
    assert abs(r.grms_deviation_db) < 0.01
    bad = a.copy()
    k = np.searchsorted(f, 300.0)
    bad[k] *= 10 ** 0.4
    r2 = psd.check_against(f, bad, *spec)
    assert not r2.passed and r2.grms_pass
    assert r2.worst_freq_hz == 300.0
    assert r2.worst_deviation_db == pytest.approx(4.0, abs=1e-9)
    assert r2.worst_excess_db == pytest.approx(1.0, abs=1e-9)
    assert (~r2.line_pass).sum() == 1
    # per-band tolerance: +/-6 dB above 250 Hz accepts the same line
    r3 = psd.check_against(f, bad, *spec, tol_db=[(0, 250, -3, 3), (250, 3000, -6, 6)])
    assert r3.passed
    # g rms tolerance: every line +1 dB on PSD (x1.122 g rms) fails +/-10 %, passes +/-15 %
    r4 = psd.check_against(f, a * 10 ** 0.1, *spec)
    assert not r4.grms_pass and r4.fraction_in_tolerance == 1.0
    assert psd.check_against(f, a * 10 ** 0.1, *spec, grms_tol_pct=15).passed


def test_check_against_bad_input():
    # common practice: clear errors
    spec = PUBLISHED["gevs_qual"][0]
    with pytest.raises(InputError, match="at least 2 lines"):
        psd.check_against([5.0, 6.0], [0.1, 0.1], *spec)
    with pytest.raises(InputError, match=">= 0"):
        psd.check_against([25.0, 30.0], [0.1, -0.1], *spec)
    with pytest.raises(InputError, match="cover"):
        psd.check_against([25.0, 30.0], [0.1, 0.1], *spec, tol_db=[(100, 200, -3, 3)])


# ---------------------------------------------------------------------------------------------
# Time compression (qualplan.dynamics.compression), MIL-STD-810H 514.8 Annex A
# ---------------------------------------------------------------------------------------------

H = 3600.0



def test_compression_check_values():
    # closed-form check cases (recomputed) of the MIL-STD-810H Method 514.8 Annex A law:
    # 1000 h -> 10 h: m = 7.5 g rms x1.8478, PSD x3.4145 (+5.33 dB); m = 8 x1.7783 (+5.00 dB);
    # m = 6 (sine) x2.1544; 60:1 with m = 8: x1.66828, PSD x2.78316
    assert compression.severity_ratio(1000 * H, 10 * H) == pytest.approx(1.8478, abs=5e-5)
    assert compression.severity_ratio(1000 * H, 10 * H) ** 2 == pytest.approx(3.4145, abs=5e-5)
    assert compression.severity_ratio(1000 * H, 10 * H, m=8) == pytest.approx(1.7783, abs=5e-5)
    assert compression.severity_ratio(1000 * H, 10 * H, m=compression.M_SINE) == \
        pytest.approx(2.1544, abs=5e-5)
    assert compression.severity_ratio(60.0, 1.0, m=8) == pytest.approx(1.66828, abs=5e-6)
    assert compression.M_RANDOM == 7.5  # MIL-STD-810H 514.8 Annex A typical random exponent


def test_compression_round_trip():
    # closed form: the two directions of t2/t1 = (S1/S2)^m are inverses
    f, a = [20, 1000, 2000], [0.04, 0.04, 0.01]  # MIL-STD-810H 514.8 Annex E min. integrity
    g0 = psd.grms(f, a)
    f2, a2 = compression.level_for_duration(f, a, 1000 * H, 10 * H)
    g1 = psd.grms(f2, a2)
    assert 10 * math.log10(g1 ** 2 / g0 ** 2) == pytest.approx(5.33, abs=0.005)  # 810H Annex A
    t = compression.duration_for_level(1000 * H, g0, g1)
    assert t == pytest.approx(10 * H, rel=1e-12)
    with pytest.raises(InputError, match="max_grms"):
        compression.level_for_duration(f, a, 1000 * H, 10 * H, max_grms=12.0)


@pytest.mark.parametrize("bad", [0.0, -1.0, float("nan"), "x"])
def test_compression_bad_input(bad):
    # common practice: clear errors
    with pytest.raises(InputError):
        compression.severity_ratio(bad, 10.0)
    with pytest.raises(InputError):
        compression.duration_for_level(10.0, 1.0, 2.0, m=bad)


@st.composite
def rough_spectra(draw):
    m = draw(st.integers(3, 200))
    seed = draw(st.integers(0, 2 ** 32 - 1))
    rng = np.random.default_rng(seed)
    f = np.sort(rng.uniform(1.0, 4.0, m))
    f = 10.0 ** f
    if np.any(np.diff(f) <= 1e-9 * f[1:]):
        f = np.geomspace(10.0, 10_000.0, m)
    g = 10.0 ** (rng.normal(-2.0, draw(st.floats(0.01, 1.0)), m))
    return f, g, draw(st.integers(2, 10))


@settings(max_examples=25, deadline=None)
@given(rough_spectra())
def test_simplify_property_conservative(case):
    # property (closed form contract): <= N breakpoints at input frequencies, first/last kept,
    # never below the input at any input frequency, excess >= 0 and reported consistently
    f, g, n = case
    r = psd.simplify_report(f, g, n)
    assert 2 <= r.freq_hz.size <= n
    assert r.freq_hz[0] == f[0] and r.freq_hz[-1] == f[-1]
    assert np.all(np.isin(r.freq_hz, f))
    assert np.all(psd.asd_at(r.freq_hz, r.asd_g2_hz, f) >= g)
    assert r.excess_db >= -1e-9
    assert r.excess_db == pytest.approx(
        20 * math.log10(psd.grms(r.freq_hz, r.asd_g2_hz) / psd.grms(f, g)), abs=1e-12)


@pytest.mark.parametrize(
    ("profiles", "match"),
    [
        ([([20, 10], [0.01, 0.01])], "strictly increasing"),
        ([([20, 50], [0.01, float("nan")])], "finite"),
        ([([20, 50], [0.01, 0.01]), ([30, 60], [0.01, -0.01])], r"profiles\[1\].values\[1\]"),
        ([([20], [0.01])], "at least 2"),
        ([], "at least one"),
    ],
)
def test_envelope_bad_input(profiles, match):
    # common practice: a clear error naming the profile and element
    with pytest.raises(InputError, match=match):
        psd.envelope(profiles)
