"""Tests of the shared log-log breakpoint machinery (qualplan.dynamics._loglog)."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from qualplan.dynamics import _loglog
from qualplan.dynamics.errors import InputError

GEVS_QUAL = ([20.0, 50.0, 800.0, 2000.0], [0.026, 0.16, 0.16, 0.026])


def test_interp_gevs_points():
    # closed-form log-log interpolation (Harris ch. on random vibration), recomputed:
    # G(30) = 0.058100, G(1000) = 0.102787
    v = _loglog.interp(*GEVS_QUAL, [30.0, 1000.0])
    # (printed to 6 decimals: compare within half a unit of the last printed digit)
    np.testing.assert_allclose(v, [0.058100, 0.102787], rtol=0, atol=5e-7)


def test_interp_outside_band_is_zero_and_edges_exact():
    # closed form: documented convention, 0.0 outside the band, breakpoint value at a breakpoint
    v = _loglog.interp(*GEVS_QUAL, [19.999, 20.0, 2000.0, 2000.001, -5.0])
    np.testing.assert_allclose(v, [0.0, 0.026, 0.026, 0.0, 0.0], rtol=1e-14)
    assert isinstance(_loglog.interp(*GEVS_QUAL, 50.0), float)


def test_exponents_and_slopes():
    # closed form: n = ln(G2/G1)/ln(f2/f1); s = 10 log10(G2/G1)/log2(f2/f1) = 3.0103 n (power)
    n = _loglog.exponents([500.0, 2000.0], [0.04, 0.01])
    assert n[0] == pytest.approx(-1.0, rel=1e-14)
    s = _loglog.slopes_db_per_oct([500.0, 2000.0], [0.04, 0.01], power=True)
    assert s[0] == pytest.approx(-10 * math.log10(2), rel=1e-14)
    s_amp = _loglog.slopes_db_per_oct([100.0, 200.0], [1.0, 2.0], power=False)
    assert s_amp[0] == pytest.approx(20 * math.log10(2), rel=1e-14)  # 6.0206 dB/oct amplitude


def test_from_slopes_round_trip_and_gevs_pitfall():
    # closed form (recomputed): GEVS 0.026 at 20 Hz with +6 dB/oct taken literally
    # gives 0.16148 at 50 Hz
    f, v = _loglog.from_slopes([20, 50, 800, 2000], 0.026, [6, 0, -6], power=True)
    assert v[1] == pytest.approx(0.16148, rel=1e-4)
    # closed form: slopes of the result are the slopes given
    np.testing.assert_allclose(_loglog.slopes_db_per_oct(f, v, power=True), [6, 0, -6],
                               atol=1e-12)
    # workmanship from 0.01 with +/-3 dB/oct (the rounded slope): 0.03981 plateau, 6.7732 g rms
    # (closed form, recomputed; sometimes attributed to 3.0103 dB/oct, but they are
    # the 3.0 dB/oct values: 0.01 x 10^(0.3 x 2) = 0.039811)
    f, v = _loglog.from_slopes([20, 80, 500, 2000], 0.01, [3.0, 0, -3.0], power=True)
    assert v[1] == pytest.approx(0.03981, rel=2e-4)
    assert math.sqrt(_loglog.segment_integrals(f, v).sum()) == pytest.approx(6.7732, rel=2e-5)
    # closed form: with the exact 10 log10(2) per unit exponent, 2 octaves x 3.0103 dB = x4.000
    f, v = _loglog.from_slopes([20, 80], 0.01, [10 * math.log10(2)], power=True)
    assert v[1] == pytest.approx(0.04, rel=1e-12)


def test_segment_integrals_n_minus_one_case():
    # closed form (n = -1 segment, log form): 0.04 x 500 x ln 4 = 27.725887 g^2
    a = _loglog.segment_integrals([500.0, 2000.0], [0.04, 0.01])
    assert a[0] == pytest.approx(0.04 * 500 * math.log(4.0), rel=1e-12)
    # continuity across n = -1 (closed form, power-law formula just beside it)
    for eps in (1e-6, 1e-10, -1e-10):
        g2 = 0.04 * 4.0 ** (-1.0 + eps)
        a = _loglog.segment_integrals([500.0, 2000.0], [0.04, g2])[0]
        exact = (g2 * 2000 - 0.04 * 500) / eps
        assert a == pytest.approx(exact, rel=1e-5 if abs(eps) < 1e-8 else 1e-9)


@pytest.mark.parametrize(
    ("freq", "values", "match"),
    [
        ([20.0], [0.01], "at least 2"),
        ([20.0, 20.0], [0.01, 0.01], "strictly increasing"),
        ([50.0, 20.0], [0.01, 0.01], "strictly increasing"),
        ([0.0, 20.0], [0.01, 0.01], "> 0"),
        ([10.0, 20.0], [0.0, 0.01], "> 0"),
        ([10.0, 20.0], [-0.1, 0.01], "> 0"),
        ([10.0, float("nan")], [0.01, 0.01], "finite"),
        ([10.0, 20.0], [0.01, float("inf")], "finite"),
        ([10.0, 20.0, 30.0], [0.01, 0.01], "must match"),
    ],
)
def test_check_profile_rejects(freq, values, match):
    # common practice: every bad input is a clear InputError naming field and rule
    with pytest.raises(InputError, match=match):
        _loglog.check_profile(freq, values, "freq_hz", "values")


def test_envelope_crossing_is_a_breakpoint():
    # closed form: 0.001 (f/20) crosses 0.01 at f = 200 Hz
    f, v = _loglog.envelope([([20, 2000], [0.01, 0.01]), ([20, 2000], [0.001, 0.1])])
    np.testing.assert_allclose(f, [20, 200, 2000], rtol=1e-12)
    np.testing.assert_allclose(v, [0.01, 0.01, 0.1], rtol=1e-12)


def test_envelope_inner_band_step_and_gap():
    # documented convention: step drawn over STEP_REL outside the higher profile's band
    f, v = _loglog.envelope([([20, 2000], [0.01, 0.01]), ([50, 100], [0.1, 0.1])])
    np.testing.assert_allclose(f, [20, 50 * (1 - 1e-6), 50, 100, 100 * (1 + 1e-6), 2000],
                               rtol=1e-9)
    np.testing.assert_allclose(v, [0.01, 0.01, 0.1, 0.1, 0.01, 0.01], rtol=1e-9)
    with pytest.raises(InputError, match="gap"):
        _loglog.envelope([([20, 50], [0.01, 0.01]), ([100, 200], [0.1, 0.1])])
    with pytest.raises(InputError, match="at least one"):
        _loglog.envelope([])


@st.composite
def profiles(draw):
    n = draw(st.integers(2, 6))
    lf = sorted(draw(st.lists(st.floats(0.0, 3.5), min_size=n, max_size=n, unique=True)))
    lf = np.array(lf)
    if np.any(np.diff(lf) < 1e-3):
        lf = np.linspace(lf[0], lf[0] + 0.01 * n, n) if lf[0] < 3.4 else np.linspace(0, 3, n)
    lv = np.array(draw(st.lists(st.floats(-4.0, 0.0), min_size=n, max_size=n)))
    return 10.0 ** lf + 1.0, 10.0 ** lv


@settings(max_examples=60, deadline=None)
@given(st.lists(profiles(), min_size=1, max_size=4))
def test_envelope_never_below_any_input(ps):
    # property (closed form): envelope >= every input everywhere on its band, = max somewhere
    lo = min(p[0][0] for p in ps)
    hi = max(p[0][-1] for p in ps)
    grid = np.geomspace(lo, hi, 3000)
    cover = np.zeros(grid.size, dtype=bool)
    for f, _ in ps:
        cover |= (grid >= f[0]) & (grid <= f[-1])
    try:
        fe, ve = _loglog.envelope(ps)
    except InputError as exc:
        assert "gap" in str(exc)
        # a gap is reported only when bands do not cover each other
        return
    pts = np.unique(np.concatenate([grid, *[p[0] for p in ps]]))
    # np.geomspace's last point may lie one ulp beyond the band edge the envelope returns
    # (its edges pass through log/exp): judge the points inside the envelope's band.
    pts = pts[(pts >= fe[0]) & (pts <= fe[-1])]
    env = _loglog.interp(fe, ve, pts)
    mx = np.max([_loglog.interp(f, v, pts) for f, v in ps], axis=0)
    assert np.all(env >= mx * (1 - 1e-9))
    assert fe[0] == pytest.approx(lo, rel=1e-12) and fe[-1] == pytest.approx(hi, rel=1e-12)
    # exact away from steps: equals the max except within the documented step widths
    near_step = np.zeros(pts.size, dtype=bool)
    for f, _ in ps:
        for e in (f[0], f[-1]):
            near_step |= np.abs(pts / e - 1) <= 2e-6
    np.testing.assert_allclose(env[~near_step], mx[~near_step], rtol=1e-9)
