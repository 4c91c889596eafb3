"""Tests of qualplan.dynamics.psd (PSD breakpoint profiles)."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate

from qualplan.dynamics import psd
from qualplan.dynamics.errors import InputError

# Published profiles: breakpoints and printed overall g rms (domain.md section 1).
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
    # recomputed value of domain.md section 1 [R] within half a unit of its last digit (1e-4 g)
    (f, a), printed, recomputed = PUBLISHED[name]
    g = psd.grms(f, a)
    assert g == pytest.approx(printed, rel=0.01)
    assert g == pytest.approx(recomputed, abs=0.5e-4)


def test_n_minus_one_segment_area():
    # domain.md section 15 check 1 (closed form): 0.04 x 500 x ln 4 = 27.725887 g^2
    a = psd.segment_mean_square_g2([500, 2000], [0.04, 0.01])
    assert a[0] == pytest.approx(0.04 * 500 * math.log(4.0), rel=1e-12)
    assert a[0] == pytest.approx(27.725887, abs=5e-7)


def test_gevs_qual_acceptance_ratio():
    # domain.md section 1 pitfalls [R]: qual/acceptance differ by x2 in PSD -> sqrt(2) in g rms
    q = psd.grms(*PUBLISHED["gevs_qual"][0])
    a = psd.grms(*PUBLISHED["gevs_acceptance"][0])
    assert q / a == pytest.approx(math.sqrt(2), rel=1e-12)


@pytest.mark.parametrize(
    ("name", "v_rms", "d_rms"),
    [
        # domain.md section 2 table [R] (closed form and adaptive quadrature agree to 1e-8)
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
    # domain.md section 2 / section 15 check 6: 6 sigma p-p 2.2915 mm for GEVS qual
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
    # closed form: interpolation points of domain.md section 1 [R]
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
