"""SRS with a smooth input model and peaks between samples (issue: fs/5 accuracy).

Reference values are exact continuous-time SDOF responses (matrix exponential
of the oscillator augmented by the input's generating ODE, tests/dynamics/
_exact_sdof.py; Harris' Shock and Vibration Handbook, 6th ed., ch. 8), and
pyyeti.srs.srs with its default upsampling as a second opinion.
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

from qualplan.dynamics import sdof_filter, sdof_hold
from qualplan.dynamics import srs as S

sys.path.insert(0, str(Path(__file__).parent))
from _exact_sdof import decaying_sines_value, exact_extremes, smooth_onset  # noqa: E402

FS = 20_000.0
DT = 1.0 / FS


def _sampled(pieces, t_end):
    t = np.arange(int(round(t_end / DT)) + 1) * DT
    x = np.zeros_like(t)
    starts = [p[0] for p in pieces] + [np.inf]
    for j, (t0, comps) in enumerate(pieces):
        sel = (t >= t0) & (t < starts[j + 1])
        x[sel] = decaying_sines_value(t[sel], comps)
    return x, t[-1]


def decaying_sines(onset: bool):
    """Sum of decaying sines at fs/5, fs/8, fs/12, fs/30 (each Q_sig = 15), decayed to 1e-6."""
    comps = [(1.0 + 0.3 * k, np.pi * f / 15, 2 * np.pi * f, 0.0)
             for k, f in enumerate(FS / np.array([5.0, 8.0, 12.0, 30.0]))]
    if onset:
        tr = 0.002
        first = [c for a, s, w, p in comps for c in smooth_onset(a, s, w, tr)]
        pieces = [(0.0, first), (tr, comps)]
    else:  # abrupt start (every sine starts at 0 with its full slope)
        pieces = [(0.0, comps)]
    x, t_end = _sampled(pieces, 0.1)
    return x, pieces, t_end


def hann_burst():
    """Hann-windowed burst of sines at fs/6 and fs/16 over 3 ms (smooth onset and end)."""
    tb = 0.003
    comps = []
    for a, f in ((1.0, FS / 6), (0.7, FS / 16)):
        w, r = 2 * np.pi * f, 2 * np.pi / tb
        comps += [(0.5 * a, 0.0, w, 0.0), (-0.25 * a, 0.0, w + r, 0.0),
                  (-0.25 * a, 0.0, w - r, 0.0)]
    x, t_end = _sampled([(0.0, comps)], tb)
    return x, [(0.0, comps)], t_end


RATIOS = np.array([40.0, 20.0, 12.0, 10.0, 8.0, 6.5, 5.5, 5.0])


def _errors(x, pieces, t_end, q, method):
    fn = FS / RATIOS
    res = S.shock_response_spectrum(x, DT, fn, q, method=method)
    err = {k: [] for k in ("maximax", "positive", "negative", "primary", "residual", "pv")}
    for i, f in enumerate(fn):
        ex = exact_extremes(f, q, pieces, t_end)
        hp, lp, hr, lr = ex["abs_accel"]
        ref = {"maximax": max(hp, -lp, hr, -lr), "positive": max(hp, hr),
               "negative": max(-lp, -lr), "primary": max(hp, -lp), "residual": max(hr, -lr),
               "pv": 2 * np.pi * f * max(abs(v) for v in ex["rel_disp"])}
        for k in err:
            got = res.pseudo_vel_m_s[i] if k == "pv" else res.kind(k)[i]
            err[k].append(got / ref[k] - 1.0)
    return {k: np.array(v) for k, v in err.items()}


def _bound(limit_8, limit_5):
    return np.where(RATIOS >= 8.0, limit_8, limit_5)


@pytest.mark.parametrize("q", [10.0, 20.0])
def test_bandlimited_decaying_sines_all_kinds(q):
    # issue goal: within 1 % for fn <= fs/8 and 2 % for fn <= fs/5, every kind;
    # exact continuous responses (augmented-state matrix exponential). The
    # record decays to 1e-6, so its residual spectrum is noise: the residual
    # kind is checked on the windowed burst below.
    x, pieces, t_end = decaying_sines(True)
    err = _errors(x, pieces, t_end, q, "bandlimited")
    for kind in ("maximax", "positive", "negative", "primary", "pv"):
        assert np.all(np.abs(err[kind]) <= _bound(0.01, 0.02)), (kind, err[kind])


@pytest.mark.parametrize("method", ["cubic", "bandlimited"])
@pytest.mark.parametrize("q", [10.0, 20.0])
def test_abrupt_onset_measured_bound(method, q):
    # every sine starting at full slope is a kink, not a smooth signal: the
    # 1 %/2 % goal does not apply. Measured worst error: cubic 2.2 % (one-sided
    # slopes at the onset kink), bandlimited 3.3 % (positive SRS, Q = 10), kept
    # here as a bound of 3.5 % (the ramp model: 13 %).
    x, pieces, t_end = decaying_sines(False)
    err = _errors(x, pieces, t_end, q, method)
    for kind in ("maximax", "positive", "negative", "primary", "pv"):
        assert np.all(np.abs(err[kind]) <= 0.035), (kind, err[kind])


@pytest.mark.parametrize("q", [10.0, 20.0])
def test_bandlimited_burst_all_kinds_with_residual(q):
    x, pieces, t_end = hann_burst()
    err = _errors(x, pieces, t_end, q, "bandlimited")
    for kind, e in err.items():
        assert np.all(np.abs(e) <= _bound(0.01, 0.02)), (kind, e)


@pytest.mark.parametrize("q", [10.0, 20.0])
def test_cubic_smooth_onset_decaying_sines(q):
    # cubic input model (no reconstruction): same goal on the smooth-onset record
    x, pieces, t_end = decaying_sines(True)
    err = _errors(x, pieces, t_end, q, "cubic")
    for kind in ("maximax", "positive", "negative", "primary", "pv"):
        assert np.all(np.abs(err[kind]) <= _bound(0.01, 0.02)), (kind, err[kind])


def test_ramp_misses_the_goal_it_is_measured_against():
    # the piecewise-linear model with peaks at the samples reads 4 % low at fs/8
    # and 7 % at fs/5 on the same record (issue 16): the test record is hard enough
    x, pieces, t_end = decaying_sines(True)
    err = _errors(x, pieces, t_end, 10.0, "ramp")["maximax"]
    assert err[RATIOS == 5.0][0] < -0.05 and err[RATIOS == 8.0][0] < -0.03


def _sawtooth(n):
    # terminal-peak sawtooth of n steps (100 g), then one sample at 0
    return np.append(100.0 * np.arange(n + 1) / n, 0.0)


@pytest.mark.parametrize("n", [40, 20])
def test_cubic_terminal_peak_sawtooth_within_half_percent(n):
    # issue goal: within 0.5 % at all fn <= fs/5 of the exact SRS of the
    # piecewise-linear signal through the samples; that exact SRS is the ramp
    # -invariant filter (exact for piecewise-linear input, Smallwood 1981) on
    # the same signal linearly resampled 64x (peaks on the fine grid within
    # 1 - cos(pi/320) = 5e-5). The kinks of the sawtooth (start of the ramp,
    # its peak, the end of the drop) get one-sided slopes, so the cubic model is
    # the piecewise-linear signal itself; measured worst 0.11 % (20 samples)
    # and 0.04 % (40), the peak search between samples. Before the kink rule,
    # 20 samples read 0.6 % high (slopes bent by the stencil across the peak).
    x = _sawtooth(n)
    fine = np.interp(np.arange((n + 1) * 64 + 1) / 64, np.arange(n + 2), x)
    fn = FS / RATIOS
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = S.srs(fine, DT / 64, fn, 10.0)
        got = S.srs(x, DT, fn, 10.0, method="cubic")
    np.testing.assert_allclose(got, ref, rtol=5e-3)


def test_bandlimited_warns_on_a_step():
    with pytest.warns(S.AccuracyWarning, match="rings"):
        S.srs(_sawtooth(20), DT, [FS / 8], 10.0, method="bandlimited")


def _half_sine_exact(n, fn, q):
    t_end = n * DT
    ex = exact_extremes(fn, q, [(0.0, [(100.0, 0.0, np.pi / t_end, 0.0)])], t_end)
    return max(abs(v) for v in ex["abs_accel"])


@pytest.mark.parametrize("method, n", [("cubic", 20), ("cubic", 30), ("cubic", 40),
                                       ("bandlimited", 40)])
def test_half_sine_within_half_percent(method, n):
    # exact half-sine SRS (closed form, augmented state; Harris' Shock and
    # Vibration Handbook, 6th ed., ch. 8); issue goal 0.5 % at fn <= fs/5 for
    # 20 samples or more. The half-sine meets the zero padding at two kinks;
    # with one-sided slopes there (sdof_hold.limited_slopes) the cubic model
    # reads within 0.03 % at 20 samples (measured; before: +0.9 % at fs/5, the
    # central stencil bent by the zeros). "bandlimited" reconstructs the kinks
    # by FFT and rings: +0.9 % at 20 samples, +0.25 % at 40 (measured).
    x = 100.0 * np.sin(np.pi * np.arange(n + 1) / n)
    fn = FS / RATIOS
    ref = np.array([_half_sine_exact(n, f, 10.0) for f in fn])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        got = S.srs(x, DT, fn, 10.0, method=method)
    np.testing.assert_allclose(got, ref, rtol=5e-3)


def test_bandlimited_half_sine_of_20_samples_rings():
    # the limit stated in docs/methods/between-samples.md: FFT reconstruction of a
    # pulse with kinks overshoots (Gibbs); measured +0.9 % at fs/5 (20 samples)
    n = 20
    x = 100.0 * np.sin(np.pi * np.arange(n + 1) / n)
    ref = _half_sine_exact(n, FS / 5, 10.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        got = S.srs(x, DT, [FS / 5], 10.0, method="bandlimited")[0]
    assert 0.005 < got / ref - 1 < 0.015
    # ...and says so, naming the cure
    with pytest.warns(S.AccuracyWarning, match="kink.*method='cubic'"):
        S.srs(x, DT, [FS / 5], 10.0, method="bandlimited")


def test_smooth_records_raise_no_kink_warning():
    # the smooth-onset decaying sines start from zeros with a bend far below 1 % of
    # the peak, and decay to 1e-6 before the end: no kink worth a warning
    x, _, _ = decaying_sines(True)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        S.srs(x, DT, [FS / 8], 10.0, method="bandlimited")
    assert not [w for w in caught if "kink" in str(w.message)]


def test_kinks_get_one_sided_slopes():
    # zeros then a half-sine of 20 samples: the slope at the start of the pulse is
    # the one-sided five-point derivative (Fornberg 1988 weights
    # -25/12, 4, -3, 4/3, -1/4), close to the true slope 100 pi / 20 per sample
    # (closed form); the interval before it keeps the zero slope of the padding.
    n = 20
    xp = np.r_[np.zeros(4), 100.0 * np.sin(np.pi * np.arange(n + 1) / n), np.zeros(4)]
    m0, m1 = sdof_hold.limited_slopes(xp)
    k = 4
    w = np.array([-25 / 12, 4.0, -3.0, 4 / 3, -1 / 4])
    assert m0[k] == pytest.approx(w @ xp[k:k + 5], rel=1e-12)
    assert m0[k] == pytest.approx(100.0 * np.pi / n, rel=2e-3)
    assert m1[k - 1] == 0.0
    # a piecewise-linear pulse (ramp up 6 samples, down 3, zeros): secant slopes
    # everywhere, i.e. the ramp-invariant model of ISO 18431-4 exactly
    pl = np.r_[0.0, 0.0, np.arange(1.0, 7.0), 4.0, 2.0, 0.0, 0.0, 0.0]
    m0, m1 = sdof_hold.limited_slopes(pl)
    np.testing.assert_allclose(m0, np.diff(pl), atol=1e-12)
    np.testing.assert_allclose(m1, np.diff(pl), atol=1e-12)


@pytest.mark.parametrize("output", ["abs_accel", "rel_disp"])
def test_secant_slopes_reproduce_the_ramp_invariant_filter(output):
    # with slopes equal to the secants the cubic-hold recursion is the
    # piecewise-linear model: Smallwood's filter (ISO 18431-4) to rounding
    rng = np.random.default_rng(3)
    x = rng.standard_normal(4000)
    fn = S.octave_grid(10.0, FS / 5, 3)
    n_extra = S._residual_samples(fn, 10.0, DT)
    b, a = sdof_filter.coefficients(fn, 10.0, DT, output=output)
    ref = sdof_filter.run_extremes(x, b, a, n_extra)
    xp = np.concatenate([[0.0], x, [0.0]])
    m0, m1 = sdof_hold.secant_slopes(xp)
    kind = sdof_hold.ABS_ACCEL if output == "abs_accel" else sdof_hold.REL_DISP
    got = sdof_hold.run_peaks(xp, m0, m1, sdof_hold.cubic_hold_coefficients(fn, 10.0, DT),
                              kind=kind, n_end=x.size, n_extra=n_extra - 1, between=False)
    if output == "rel_disp":
        got = got * DT * DT * sdof_filter.G0_M_S2
    np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-12 * np.abs(ref).max())


def test_against_pyyeti_with_its_upsampling():
    # second opinion: pyyeti.srs.srs with its default settings (it band-limits
    # and upsamples so that fs >= 10 fn); smooth-onset record, Q = 10; both
    # are within about 1 % of the exact SRS
    pyyeti_srs = pytest.importorskip("pyyeti.srs")
    x, _, _ = decaying_sines(True)
    fn = FS / RATIOS
    ref = pyyeti_srs.srs(x, FS, fn, 10.0)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a smooth record: no step warning
        got = S.srs(x, DT, fn, 10.0, method="bandlimited")
    np.testing.assert_allclose(got, ref, rtol=1.5e-2)


def test_unknown_method():
    with pytest.raises(S.InputError, match="method"):
        S.srs(np.ones(10), DT, [100.0], 10.0, method="spline")


def test_time_domain_ers_bandlimited_pseudo_accel():
    # ERS of a time history = wn^2 max|z| / g0 (pseudo-acceleration maximax);
    # exact continuous responses, goal 1 % (fs/8) / 2 % (fs/5)
    from qualplan.dynamics import extreme as E

    x, pieces, t_end = decaying_sines(True)
    fn = FS / RATIOS
    got = E.ers_shock(x, DT, fn, 10.0, method="bandlimited")
    ref = np.array([(2 * np.pi * f) ** 2 / sdof_filter.G0_M_S2
                    * max(abs(v) for v in exact_extremes(f, 10.0, pieces, t_end)["rel_disp"])
                    for f in fn])
    assert np.all(np.abs(got / ref - 1) <= _bound(0.01, 0.02))


@pytest.mark.parametrize("xp", [
    np.random.default_rng(4).standard_normal(501),
    np.r_[np.zeros(5), np.ones(7), np.zeros(3)],  # step up, down: kinks, one-interval ramps
    np.linspace(0.0, 1.0, 9),  # linear samples: the slope is the secant (Fritsch & Carlson)
    np.array([1.0, -2.0]),
])
def test_one_pass_limited_slopes_equal_the_vectorised_form(xp, monkeypatch):
    # The compiled one-pass kernel must give exactly the slopes of the array form
    # (Fritsch & Carlson 1980 limiter on the fourth-order central difference).
    m0, m1 = sdof_hold.limited_slopes(xp)
    monkeypatch.setattr(sdof_hold, "_HAVE_NUMBA", False)
    r0, r1 = sdof_hold.limited_slopes(xp)
    np.testing.assert_array_equal(m0, r0)
    np.testing.assert_array_equal(m1, r1)
    if xp.size == 9:  # linear two samples away from the zero padding: the secant 1/8
        np.testing.assert_allclose(m0[2:7], 0.125, rtol=1e-14)


# --------------------------------------------------------------------------
# method="auto": one method for smooth records and for records with steps/kinks


@pytest.mark.parametrize("q", [10.0, 20.0])
def test_auto_smooth_onset_decaying_sines_all_kinds(q):
    # issue goal (1 % for fn <= fs/8, 2 % for fn <= fs/5, every kind) against the
    # exact continuous responses (augmented-state matrix exponential, _exact_sdof;
    # Harris ch. 8). The record is smooth: "auto" reconstructs it (FFT), pre-emphasises
    # it, runs Smallwood's ramp-invariant filter and takes parabolic vertices.
    # Measured worst 0.13 % (pv at fs/20). Residual kind: on the burst below (this
    # record decays to 1e-6, its residual is noise), as for "bandlimited".
    x, pieces, t_end = decaying_sines(True)
    assert S.record_model(x) == "bandlimited"
    err = _errors(x, pieces, t_end, q, "auto")
    for kind in ("maximax", "positive", "negative", "primary", "pv"):
        assert np.all(np.abs(err[kind]) <= _bound(0.01, 0.02)), (kind, err[kind])


@pytest.mark.parametrize("q", [10.0, 20.0])
def test_auto_burst_all_kinds_with_residual(q):
    # same goal on the Hann-windowed burst, residual included; measured worst
    # 0.84 % (negative, fs/40, Q = 10; "bandlimited" 0.83 % there)
    x, pieces, t_end = hann_burst()
    assert S.record_model(x) == "bandlimited"
    err = _errors(x, pieces, t_end, q, "auto")
    for kind, e in err.items():
        assert np.all(np.abs(e) <= _bound(0.01, 0.02)), (kind, e)


@pytest.mark.parametrize("q", [10.0, 20.0])
def test_auto_abrupt_onset_measured_bound(q):
    # sines starting at full slope: a kink at the onset, so "auto" takes the cubic
    # hold; not a smooth record (the 1 %/2 % goal does not apply), measured worst
    # 2.2 %, kept at the 3.5 % bound of test_abrupt_onset_measured_bound
    x, pieces, t_end = decaying_sines(False)
    assert S.record_model(x) == "cubic"
    err = _errors(x, pieces, t_end, q, "auto")
    for kind in ("maximax", "positive", "negative", "primary", "pv"):
        assert np.all(np.abs(err[kind]) <= 0.035), (kind, err[kind])


@pytest.mark.parametrize("n", [40, 20])
def test_auto_terminal_peak_sawtooth_within_half_percent(n):
    # issue goal 0.5 % at all fn <= fs/5; exact SRS of the piecewise-linear signal
    # through the samples (ramp-invariant filter, exact for it, Smallwood 1981, on
    # the signal linearly resampled 64x). The step of the sawtooth makes "auto"
    # take the cubic hold: measured 0.11 % (20 samples), 0.04 % (40).
    x = _sawtooth(n)
    assert S.record_model(x) == "cubic"
    fine = np.interp(np.arange((n + 1) * 64 + 1) / 64, np.arange(n + 2), x)
    fn = FS / RATIOS
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = S.srs(fine, DT / 64, fn, 10.0)
        got = S.srs(x, DT, fn, 10.0, method="auto")
    np.testing.assert_allclose(got, ref, rtol=5e-3)


@pytest.mark.parametrize("q", [10.0, 20.0])
@pytest.mark.parametrize("n", [20, 30, 40])
def test_auto_half_sine_within_half_percent(n, q):
    # exact half-sine SRS (closed form, augmented state; Harris ch. 8); issue goal
    # 0.5 % at fn <= fs/5 for 20 samples or more. The kinks at the pulse's ends make
    # "auto" take the cubic hold (measured within 0.03 %); "bandlimited" reads
    # +0.9 % at 20 samples (test_bandlimited_half_sine_of_20_samples_rings).
    x = 100.0 * np.sin(np.pi * np.arange(n + 1) / n)
    assert S.record_model(x) == "cubic"
    fn = FS / RATIOS
    ref = np.array([_half_sine_exact(n, f, q) for f in fn])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        got = S.srs(x, DT, fn, q, method="auto")
    np.testing.assert_allclose(got, ref, rtol=5e-3)


def test_auto_warns_only_beyond_its_bounds():
    # a smooth record up to fs/5: no warning at all; above fs/5: the "not verified" one
    x, _, _ = decaying_sines(True)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        S.srs(x, DT, FS / RATIOS, 10.0, method="auto")
    with pytest.warns(S.AccuracyWarning, match="fifth of the sample rate"):
        S.srs(x, DT, [FS / 4], 10.0, method="auto")
    # a pulse with kinks: read with the cubic hold, and said so above fs/8
    pulse = 100.0 * np.sin(np.pi * np.arange(21) / 20)
    with pytest.warns(S.AccuracyWarning, match="method='auto' reads this record with the cubic"):
        S.srs(pulse, DT, [FS / 6], 10.0, method="auto")


def test_vertex_extremes_of_a_sampled_cosine():
    # kernel check with the identity filter (b = [1, 0, 0], a = [1, 0, 0]): the
    # extremes are the vertices of the parabola through the largest (smallest)
    # sample of cos(2 pi k / N + phi) and its two neighbours (Lagrange interpolation,
    # closed form u - (v - y)^2 / (8 (v - 2 u + y))). At N = 20 the samples alone are
    # up to 1 - cos(pi / N) = 1.2 % low; the vertex is within 2.3e-4 of the amplitude
    # (that formula's worst over the phase, evaluated at 2001 phases: 2.26e-4).
    from qualplan.dynamics import sdof_filter

    n = 20
    worst = 0.0
    for phi in np.linspace(0.0, 2 * np.pi / n, 11):
        x = np.cos(2 * np.pi * np.arange(5, 200) / n + phi)
        e = sdof_filter.run_vertex_extremes(
            x, np.array([[1.0, 0.0, 0.0]]), np.array([[1.0, 0.0, 0.0]]), x.size, [0])
        k = int(np.argmax(x[1:-1])) + 1
        v, u, y = x[k - 1], x[k], x[k + 1]
        assert e[0, 0] == pytest.approx(u - (v - y) ** 2 / (8 * (v - 2 * u + y)), abs=1e-12)
        assert e[0, 0] >= x.max() and e[0, 1] <= x.min()
        worst = max(worst, abs(e[0, 0] - 1.0), abs(e[0, 1] + 1.0))
    assert worst <= 2.3e-4
    assert 1.0 - np.cos(np.pi / n) > 0.012  # what the samples alone would miss


def test_record_model_rule():
    # steps and kinks -> cubic hold; a smooth record -> band-limited reconstruction
    assert S.record_model(_sawtooth(20)) == "cubic"
    assert S.record_model(np.r_[np.zeros(5), np.ones(10), np.zeros(5)]) == "cubic"
    assert S.record_model(np.sin(2 * np.pi * np.arange(1000) / 37.0) *
                          np.hanning(1000) ** 2) == "bandlimited"


def test_time_domain_ers_auto_pseudo_accel():
    # ERS (pseudo-acceleration maximax) with "auto": exact continuous responses,
    # goal 1 % (fs/8) / 2 % (fs/5), as test_time_domain_ers_bandlimited_pseudo_accel
    from qualplan.dynamics import extreme as E

    x, pieces, t_end = decaying_sines(True)
    fn = FS / RATIOS
    got = E.ers_shock(x, DT, fn, 20.0, method="auto")
    ref = np.array([(2 * np.pi * f) ** 2 / sdof_filter.G0_M_S2
                    * max(abs(v) for v in exact_extremes(f, 20.0, pieces, t_end)["rel_disp"])
                    for f in fn])
    assert np.all(np.abs(got / ref - 1) <= _bound(0.01, 0.02))


def test_auto_against_pyyeti_with_its_upsampling():
    # second opinion: pyyeti.srs.srs defaults (it upsamples to fs >= 10 fn); both
    # within about 1 % of the exact SRS on the smooth-onset record
    pyyeti_srs = pytest.importorskip("pyyeti.srs")
    x, _, _ = decaying_sines(True)
    fn = FS / RATIOS
    ref = pyyeti_srs.srs(x, FS, fn, 10.0)
    got = S.srs(x, DT, fn, 10.0, method="auto")
    np.testing.assert_allclose(got, ref, rtol=1.5e-2)
