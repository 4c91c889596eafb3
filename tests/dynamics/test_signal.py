"""Tests of qualplan.dynamics.signal (Welch and maximax PSD of measured records)."""

import math

import numpy as np
import pytest
import scipy.signal

from qualplan.dynamics import psd, signal
from qualplan.dynamics.errors import InputError
from qualplan.dynamics.synthesis import gaussian_from_psd

FS = 8192.0


def _white(seconds, seed=0, sigma=1.0):
    return sigma * np.random.default_rng(seed).standard_normal(int(seconds * FS))


def test_same_as_scipy_welch():
    # reference library scipy.signal.welch (same window, overlap, constant detrend, density)
    x = _white(20.0, 1) + 0.3
    for kw, nper in (({"resolution_hz": 4.0}, 2048), ({"segment_s": 0.125}, 1024)):
        r = signal.welch_psd(x, FS, overlap=0.5, window="hann", **kw)
        f, p = scipy.signal.welch(x, FS, window="hann", nperseg=nper, noverlap=nper // 2)
        np.testing.assert_allclose(r.freq_hz, f)
        np.testing.assert_allclose(r.asd_g2_hz, p, rtol=1e-10, atol=1e-16)
        assert r.nperseg == nper
    r = signal.welch_psd(x, FS, resolution_hz=8.0, overlap=0.25, window=("tukey", 0.25))
    _, p = scipy.signal.welch(x, FS, window=("tukey", 0.25), nperseg=1024, noverlap=256)
    np.testing.assert_allclose(r.asd_g2_hz, p, rtol=1e-10, atol=1e-16)


def test_parseval_area_equals_variance():
    # closed form (Parseval): with a rectangular window and no overlap, sum(G) df equals the mean
    # of the segments' variances exactly; with Hann it equals the variance within the random
    # error of the estimate
    x = _white(16.0, 2, sigma=2.0)
    r = signal.welch_psd(x, FS, resolution_hz=2.0, overlap=0.0, window="boxcar")
    segs = x[: r.n_segments * r.nperseg].reshape(r.n_segments, r.nperseg)
    assert r.grms ** 2 == pytest.approx(np.mean(segs.var(axis=1)), rel=1e-12)
    rh = signal.welch_psd(x, FS, resolution_hz=2.0)
    assert rh.grms ** 2 == pytest.approx(x.var(), rel=3 * rh.random_error / math.sqrt(rh.nperseg))


def test_dof_and_random_error():
    # Bendat & Piersol (Random Data, 4th ed., ch. 8): eps_r = 1/sqrt(n_d); rectangular,
    # no overlap: n_d = number of segments; Welch 1967: Hann 50 % -> n_d -> K/(1 + 2/36)
    n_d, dof, err = signal.welch_dof("boxcar", 1024, 0, 25)
    assert (n_d, dof, err) == (25.0, 50.0, 0.2)
    n_d, _, _ = signal.welch_dof("hann", 1024, 512, 10_000)
    assert n_d == pytest.approx(10_000 / (1 + 2 / 36), rel=1e-3)


def test_synthesised_record_grms_within_random_error():
    # GSFC-STD-7000 qualification PSD (14.1356 g rms, Table 2.4-3) synthesised, then
    # estimated: line scatter matches eps_r = 1/sqrt(n_d) and g rms is within the expected
    # random error (far smaller than one line's, since all lines average)
    spec = ([20.0, 50.0, 800.0, 2000.0], [0.026, 0.16, 0.16, 0.026])
    x = gaussian_from_psd(*spec, 60.0, FS, rng=np.random.default_rng(4), random_amplitude=True)
    r = signal.welch_psd(x, FS, resolution_hz=4.0)
    assert r.random_error == pytest.approx(1 / math.sqrt(r.n_averages))
    band = (r.freq_hz >= 60) & (r.freq_hz <= 700)
    ratio = r.asd_g2_hz[band] / psd.asd_at(*spec, r.freq_hz[band])
    # scatter of the line estimates = eps_r (within the sampling error of a std over ~160 lines)
    assert ratio.std() == pytest.approx(r.random_error, rel=0.15)
    assert ratio.mean() == pytest.approx(1.0, abs=3 * r.random_error / math.sqrt(band.sum()))
    # g rms of the estimate: the normalised random error of a mean-square estimate of Gaussian
    # data is 1/sqrt(B_s T) with the statistical bandwidth B_s = (int G)^2 / int G^2 (Bendat &
    # Piersol, ch. 8), half that on the rms; check within 3 of those sigmas
    ff = np.geomspace(20, 2000, 20001)
    gg = psd.asd_at(*spec, ff)
    b_s = np.trapezoid(gg, ff) ** 2 / np.trapezoid(gg ** 2, ff)
    sigma_rms = 0.5 / math.sqrt(b_s * 60.0)
    g = math.sqrt(np.sum(r.asd_g2_hz) * r.resolution_hz)
    assert g == pytest.approx(14.1356, rel=3 * sigma_rms)  # GSFC-STD-7000 qual
    assert r.grms == pytest.approx(x.std(), rel=1e-3)  # Parseval with Hann (closed form)


def test_default_segment_and_short_record():
    # documented default: the longest power of two with >= 30 segments at 50 % overlap
    x = _white(10.0)
    r = signal.welch_psd(x, FS)
    assert r.nperseg == 4096 and r.n_segments >= 30
    assert signal.welch_psd(x, FS, overlap=0.0).nperseg == 2048
    with pytest.raises(InputError, match="shorter than one Welch segment"):
        signal.welch_psd(x[:1000], FS, resolution_hz=1.0)
    with pytest.raises(InputError, match="finite"):
        signal.welch_psd(np.array([0.0, np.nan, 1.0]), FS)
    with pytest.raises(InputError, match="overlap"):
        signal.welch_psd(x, FS, overlap=1.0)
    with pytest.raises(InputError, match="fs_hz"):
        signal.welch_psd(x, 0.0)
    with pytest.raises(InputError, match="window"):
        signal.welch_psd(x, FS, window="no-such-window")


def test_maximax_finds_the_burst():
    # closed form: a record quiet except for a 2 s burst at 4x amplitude (16x PSD): the maximax
    # PSD is the burst's PSD, found at the burst time, equal to scipy.signal.welch of the window
    x = _white(20.0, 5, sigma=0.5)
    i0 = int(8.0 * FS)
    x[i0:i0 + int(2 * FS)] *= 4.0
    m = signal.maximax_psd(x, FS, window_s=1.0, resolution_hz=16.0)
    assert m.segments_per_window == 31 and m.n_windows == 39
    line = (m.freq_hz > 100) & (m.freq_hz < 3000)
    # expected ASD of the burst: sigma^2 16 / (fs/2) per Hz
    expected = 0.25 * 16 / (FS / 2)
    assert np.median(m.asd_g2_hz[line]) == pytest.approx(expected, rel=0.15)
    assert np.all((m.time_of_max_s[line] >= 7.0) & (m.time_of_max_s[line] <= 9.0))
    # each window's PSD equals scipy's Welch on that window
    mx = np.zeros_like(m.asd_g2_hz)
    step = int(round(m.window_step_s * FS))
    wlen = int(round(m.window_s * FS))
    for w in range(m.n_windows):
        _, p = scipy.signal.welch(x[w * step: w * step + wlen], FS, nperseg=m.nperseg,
                                  noverlap=m.noverlap)
        mx = np.maximum(mx, p)
    np.testing.assert_allclose(m.asd_g2_hz, mx, rtol=1e-10, atol=1e-18)
    assert m.random_error == pytest.approx(1 / math.sqrt(m.n_averages))
    with pytest.raises(InputError, match="shorter than one maximax window"):
        signal.maximax_psd(x[:4000], FS, window_s=1.0)


def test_band_feeds_simplify_and_check():
    # closed form: band() keeps the lines in [f_lo, f_hi] (no DC line), ready for psd functions
    x = _white(8.0, 3)
    r = signal.welch_psd(x, FS, resolution_hz=8.0)
    f, a = r.band(20.0, 2000.0)
    assert f[0] == 24.0 and f[-1] == 2000.0 and np.all(a > 0)
    s = psd.simplify_report(f, a, 6)
    assert np.all(psd.asd_at(s.freq_hz, s.asd_g2_hz, f) >= a)
    with pytest.raises(InputError, match="at least 2"):
        r.band(3000.0, 3001.0)
