"""Streaming analyses (qualplan.dynamics.streaming): chunked results equal whole-record ones.

Every record here has a length that is not a multiple of the chunk size, and each
analysis is also fed irregular chunks (including one-sample and empty chunks), so
every piece of carried state (filter state, Welch tail, open maximax windows,
reversal candidate, rainflow residue, pre-event samples) crosses a boundary.
"""

import math
import warnings

import numpy as np
import pytest
import rainflow as rainflow_ref  # reference library (test-only)
import scipy.signal
import scipy.stats

from qualplan.dynamics import extreme, fatigue, rainflow, sdof_filter, signal, srs, streaming
from qualplan.dynamics.errors import AccuracyWarning, InputError

FS = 2000.0
DT = 1.0 / FS
RTOL = 1e-12
G0 = 9.80665


def record(n: int, seed: int = 1) -> np.ndarray:
    """Invented random record: band-limited noise plus a 40 Hz tone and a mean [g]."""
    rng = np.random.default_rng(seed)
    sos = scipy.signal.butter(4, [20.0, 400.0], btype="band", fs=FS, output="sos")
    x = scipy.signal.sosfilt(sos, rng.standard_normal(n)) * 3.0
    t = np.arange(n) * DT
    return x + 0.5 * np.sin(2 * np.pi * 40.0 * t) + 0.1


def regular(x: np.ndarray, size: int):
    for i in range(0, x.size, size):
        yield x[i:i + size]


def irregular(x: np.ndarray, seed: int = 7):
    """Chunks of random length 0..5000, with some of length 0 and 1."""
    rng = np.random.default_rng(seed)
    i = 0
    while i < x.size:
        m = int(rng.choice([0, 1, 2, 3, int(rng.integers(4, 5000))]))
        yield x[i:i + m]
        i += m


def chunkings(x):
    assert x.size % 1000 != 0 and x.size % 4096 != 0
    return {"1000": lambda: regular(x, 1000), "4096": lambda: regular(x, 4096),
            "irregular": lambda: irregular(x)}


N = 50_003  # not a multiple of any chunk size used
X = record(N)
FN = np.geomspace(5.0, 180.0, 12)


# --------------------------------------------------------------------------
# Welch / maximax


@pytest.mark.parametrize("kind", ["1000", "4096", "irregular"])
def test_welch_chunked_equals_whole_and_scipy(kind):
    res = streaming.feed(streaming.WelchStream(FS, resolution_hz=2.0), chunkings(X)[kind]())
    whole = signal.welch_psd(X, FS, resolution_hz=2.0)
    np.testing.assert_allclose(res.asd_g2_hz, whole.asd_g2_hz, rtol=RTOL, atol=0)
    assert res.n_segments == whole.n_segments
    assert res.dof == whole.dof and res.grms == pytest.approx(whole.grms, rel=RTOL)
    # reference library: scipy.signal.welch, detrend='constant', density, one-sided
    f, p = scipy.signal.welch(X, FS, window="hann", nperseg=1000, noverlap=500)
    np.testing.assert_allclose(res.freq_hz, f, rtol=0, atol=0)
    # lines 1e-14 below the peak (the window's leakage floor) carry the rounding of the
    # peak lines: compare them to the peak, the others to themselves
    np.testing.assert_allclose(res.asd_g2_hz, p, rtol=1e-10, atol=1e-14 * p.max())


@pytest.mark.parametrize("kind", ["1000", "4096", "irregular"])
def test_maximax_chunked_equals_whole(kind):
    x = X * (1.0 + 2.0 * np.exp(-(((np.arange(N) * DT) - 14.0) / 2.0) ** 2))  # a burst
    res = streaming.feed(streaming.MaximaxStream(FS, window_s=1.0), chunkings(x)[kind]())
    whole = signal.maximax_psd(x, FS, window_s=1.0)
    np.testing.assert_allclose(res.asd_g2_hz, whole.asd_g2_hz, rtol=RTOL, atol=0)
    np.testing.assert_array_equal(res.time_of_max_s, whole.time_of_max_s)
    assert (res.n_windows, res.segments_per_window, res.nperseg) == (
        whole.n_windows, whole.segments_per_window, whole.nperseg)
    assert res.grms_max == pytest.approx(whole.grms_max, rel=RTOL)
    assert res.window_step_s == whole.window_step_s
    # the burst at 14 s holds the maximum of the lines with most energy
    k = int(np.argmax(res.asd_g2_hz))
    assert 11.0 < res.time_of_max_s[k] < 15.0


def test_maximax_window_overlap_and_resolution_options():
    kw = dict(window_s=2.0, window_overlap=0.75, resolution_hz=4.0, overlap=0.25)
    res = streaming.feed(streaming.MaximaxStream(FS, **kw), irregular(X))
    whole = signal.maximax_psd(X, FS, **kw)
    np.testing.assert_allclose(res.asd_g2_hz, whole.asd_g2_hz, rtol=RTOL, atol=0)
    assert res.n_windows == whole.n_windows


def test_welch_needs_resolution_and_one_segment():
    with pytest.raises(InputError, match="resolution_hz"):
        streaming.WelchStream(FS)
    s = streaming.WelchStream(FS, resolution_hz=1.0)
    s.update(np.zeros(100))
    with pytest.raises(InputError, match="shorter than one Welch segment"):
        s.result()


# --------------------------------------------------------------------------
# SRS / ERS


def shock(n: int) -> np.ndarray:
    """Invented decaying-sine shock of 120 Hz, 50 g, starting at 0.1 s [g]."""
    t = np.arange(n) * DT
    tt = np.clip(t - 0.1, 0, None)
    return 50.0 * np.exp(-tt * 40.0) * np.sin(2 * np.pi * 120.0 * tt) * (t >= 0.1)


@pytest.mark.parametrize("kind", ["1000", "4096", "irregular"])
def test_srs_chunked_equals_whole(kind):
    x = X + shock(N)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        res = streaming.feed(streaming.SrsStream(DT, FN, 10.0, pseudo_velocity=True),
                             chunkings(x)[kind]())
        whole = srs.shock_response_spectrum(x, DT, FN, 10.0)
    for name in ("maximax_g", "positive_g", "negative_g", "primary_g", "residual_g",
                 "pseudo_vel_m_s"):
        np.testing.assert_allclose(getattr(res, name), getattr(whole, name), rtol=RTOL, atol=0)
    assert res.duration_s == whole.duration_s
    assert res.residual_extension_s == whole.residual_extension_s


def test_srs_stream_against_full_response_history():
    # Independent of any extremes kernel: the full response history of
    # sdof_filter.response over the record followed by its free decay (zeros).
    x = shock(3001)
    q = 10.0
    zeta = 1 / (2 * q)
    n_extra = np.ceil(1 / (FN * math.sqrt(1 - zeta**2)) / DT).astype(int) + 2
    pad = np.concatenate([x, np.zeros(n_extra.max())])
    y = sdof_filter.response(pad, DT, FN, q)
    res = streaming.feed(streaming.SrsStream(DT, FN, q), regular(x, 333))
    for i in range(FN.size):
        during = y[i, :x.size]
        after = y[i, x.size - 1:x.size + n_extra[i]]
        assert res.primary_g[i] == pytest.approx(np.abs(during).max(), rel=RTOL)
        assert res.residual_g[i] == pytest.approx(np.abs(after).max(), rel=RTOL)


def test_srs_of_decaying_sine_peaks_near_its_frequency():
    # Closed form (Harris' Shock and Vibration Handbook, 6th ed., ch. 8, common
    # practice): the SRS of a lightly damped sine burst peaks at the burst frequency
    # and tends to the peak input (50 g) at high fn.
    fn = srs.octave_grid(20.0, 190.0, 12)
    res = streaming.feed(streaming.SrsStream(DT, fn, 10.0), regular(shock(4001), 777))
    assert abs(fn[int(np.argmax(res.maximax_g))] / 120.0 - 1) < 0.12
    assert res.maximax_g[-1] > 50.0


@pytest.mark.parametrize("kind", ["1000", "irregular"])
def test_ers_chunked_equals_ers_shock(kind):
    x = X[:20_011] + shock(20_011)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        e = streaming.feed(streaming.ErsStream(DT, FN, 10.0),
                           regular(x, 1000) if kind == "1000" else irregular(x))
        whole = extreme.ers_shock(x, DT, FN, 10.0)
    np.testing.assert_allclose(e, whole, rtol=RTOL, atol=0)


def test_srs_stream_warns_in_result_and_refuses_short():
    s = streaming.SrsStream(DT, [150.0, 400.0])
    s.update(np.ones(10))
    res = s.result()
    assert any("tenth of the sample rate" in w for w in res.warnings)
    assert any("still active" in w for w in res.warnings)
    s = streaming.SrsStream(DT, [100.0])
    s.update([1.0])
    with pytest.raises(InputError, match="at least 2"):
        s.result()


# --------------------------------------------------------------------------
# FDS and rainflow


@pytest.mark.parametrize("kind", ["1000", "4096", "irregular"])
@pytest.mark.parametrize("interp", [True, False])
def test_fds_chunked_equals_fds_time(kind, interp):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        d = streaming.feed(streaming.FdsStream(DT, FN, 10.0, 6.0, interpolate_peaks=interp),
                           chunkings(X)[kind]())
        whole = fatigue.fds_time(X, DT, FN, 10.0, 6.0, interpolate_peaks=interp)
    np.testing.assert_allclose(d, whole, rtol=RTOL, atol=0)


def test_fds_skip_and_free_decay_equal_fds_time():
    x = X[:30_001] + shock(30_001)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        d = streaming.feed(streaming.FdsStream(DT, FN, 8.0, 8.0, free_decay=True, skip_s=0.37),
                           irregular(x, seed=3))
        whole = fatigue.fds_time(x, DT, FN, 8.0, 8.0, free_decay=True, skip_s=0.37)
    np.testing.assert_allclose(d, whole, rtol=RTOL, atol=0)


def test_fds_raw_peaks_equal_rainflow_reference_of_the_response():
    # Reference library: rainflow (count_cycles) on the pseudo-acceleration response
    # history wn^2 z / g0 from sdof_filter.response; Miner sum sum n (range/2)^b.
    fn = np.array([15.0, 60.0, 150.0])
    x = X[:12_345]
    z = sdof_filter.response(x, DT, fn, 10.0, output="rel_disp")
    b = 5.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        d = streaming.feed(streaming.FdsStream(DT, fn, 10.0, b, interpolate_peaks=False),
                           regular(x, 1001))
    for i, f in enumerate(fn):
        resp = z[i] * (2 * np.pi * f) ** 2 / G0
        ref = sum(n * (r / 2) ** b for r, n in rainflow_ref.count_cycles(resp))
        assert d[i] == pytest.approx(ref, rel=1e-9)  # response rounding differs slightly


def test_fds_stack_grows_for_a_long_residue():
    # A slowly growing then decaying sine: many reversals stay on the rainflow stack
    # (each range larger than the last), more than the initial stack of 256.
    n = 40_001
    t = np.arange(n) * DT
    env = np.where(t < t[-1] / 2, t, t[-1] - t) + 0.01
    x = env * np.sin(2 * np.pi * 50.0 * t)
    s = streaming.FdsStream(DT, [50.0], 10.0, 4.0, interpolate_peaks=False)
    for c in regular(x, 997):
        s.update(c)
    assert s.residue_size.max() > 256
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        whole = fatigue.fds_time(x, DT, [50.0], 10.0, 4.0, interpolate_peaks=False)
    np.testing.assert_allclose(s.result(), whole, rtol=RTOL, atol=0)


@pytest.mark.parametrize("kind", ["1000", "4096", "irregular"])
def test_rainflow_chunked_counts_exactly(kind):
    x = np.round(X * 4) / 4  # quantised: plateaus and repeated values
    cyc = streaming.feed(streaming.RainflowStream(), chunkings(x)[kind]())
    np.testing.assert_array_equal(cyc, rainflow.count(x))
    # reference library: rainflow.extract_cycles gives the same sequence (ASTM E1049-85)
    ref = np.array([(r, m, c) for r, m, c, _, _ in rainflow_ref.extract_cycles(x)])
    np.testing.assert_array_equal(cyc, ref)


def test_rainflow_astm_example_fed_one_sample_at_a_time():
    # ASTM E1049-85 (R2017) Fig. 6 / X1 example history, its published cycles.
    hist = [-2, 1, -3, 5, -1, 3, -4, 4, -2]
    s = streaming.RainflowStream()
    for v in hist:
        s.update([v])
    cyc = s.result()
    assert cyc[:, [0, 2]].tolist() == [[3.0, 0.5], [4.0, 0.5], [4.0, 1.0], [8.0, 0.5],
                                       [9.0, 0.5], [8.0, 0.5], [6.0, 0.5]]


@pytest.mark.parametrize("hist", [[], [1.0], [1.0, 1.0], [1.0, 2.0], [0.0, 2.0, 2.0, 1.0]])
def test_rainflow_short_histories(hist):
    s = streaming.RainflowStream()
    s.update(hist)
    np.testing.assert_array_equal(s.result(), rainflow.count(hist) if hist else
                                  np.empty((0, 3)))


# --------------------------------------------------------------------------
# Statistics


@pytest.mark.parametrize("kind", ["1000", "4096", "irregular"])
def test_stats_chunked_equal_numpy_and_scipy(kind):
    x = X + 1000.0  # a large mean: the merge formulas must not cancel
    st = streaming.feed(streaming.StatsStream(FS), chunkings(x)[kind]())
    # reference: numpy and scipy.stats on the whole array
    assert st.n_samples == N and st.duration_s == N / FS
    assert st.mean_g == pytest.approx(np.mean(x), rel=RTOL)
    assert st.rms_g == pytest.approx(np.sqrt(np.mean(x * x)), rel=RTOL)
    assert st.std_g == pytest.approx(np.std(x), rel=1e-11)
    assert st.min_g == x.min() and st.max_g == x.max() and st.peak_g == np.abs(x).max()
    assert st.skewness == pytest.approx(scipy.stats.skew(x), rel=1e-9)
    assert st.kurtosis == pytest.approx(scipy.stats.kurtosis(x, fisher=False), rel=1e-11)
    assert st.crest_factor == pytest.approx(st.peak_g / st.rms_g, rel=RTOL)


def test_stats_of_a_sine_closed_form():
    # Closed form: a full-period sine of amplitude A has rms A/sqrt(2), crest
    # factor sqrt(2), skewness 0, kurtosis 1.5.
    t = np.arange(20_000) / 20_000
    x = 3.0 * np.sin(2 * np.pi * 5 * t)
    st = streaming.feed(streaming.StatsStream(20_000.0), regular(x, 3333))
    assert st.rms_g == pytest.approx(3.0 / math.sqrt(2), rel=1e-12)
    assert st.kurtosis == pytest.approx(1.5, rel=1e-9)
    assert abs(st.skewness) < 1e-9
    assert st.crest_factor == pytest.approx(math.sqrt(2), rel=1e-6)


def test_stats_constant_record():
    st = streaming.feed(streaming.StatsStream(FS), [np.full(10, 2.0), np.full(3, 2.0)])
    assert st.std_g == 0.0 and math.isnan(st.kurtosis) and st.rms_g == 2.0


# --------------------------------------------------------------------------
# Shock events


def shocks_record(n: int, starts_s, seed: int = 4) -> np.ndarray:
    rng = np.random.default_rng(seed)
    x = 0.3 * rng.standard_normal(n)
    t = np.arange(n) * DT
    for k, t0 in enumerate(starts_s):
        tt = t - t0
        on = tt >= 0
        x += on * (20.0 + 10 * k) * np.exp(-np.clip(tt, 0, None) * 60.0) * np.sin(
            2 * np.pi * (80.0 + 30 * k) * tt)
    return x


def reference_events(x, thr, n_pre, n_post):
    """Plain loop over samples: windows [first - pre, last + post], merged within pre + post."""
    out = []
    first = last = None
    for i, v in enumerate(x):
        if abs(v) >= thr:
            if first is not None and i - last > n_pre + n_post:
                out.append((max(0, first - n_pre), min(len(x) - 1, last + n_post)))
                first = None
            if first is None:
                first = i
            last = i
    if first is not None:
        out.append((max(0, first - n_pre), min(len(x) - 1, last + n_post)))
    return out


@pytest.mark.parametrize("kind", ["1000", "4096", "irregular"])
def test_shock_events_chunked_equal_whole(kind):
    x = shocks_record(N, [0.0005, 5.0, 5.12, 17.3, 24.99])
    fn = srs.octave_grid(20.0, 190.0, 6)
    kw = dict(threshold_g=5.0, pre_s=0.02, post_s=0.1, fn_hz=fn, q=10.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        events = streaming.feed(streaming.ShockDetector(DT, **kw), chunkings(x)[kind]())
        ref = reference_events(x, 5.0, 40, 200)
        assert [(round(e.start_s / DT), round(e.end_s / DT)) for e in events] == ref
        # 5.0 and 5.12 s merge (closer than pre + post); 24.99 s is cut by the record end
        assert len(events) == 4
        for e, (i0, i1) in zip(events, ref, strict=True):
            whole = srs.shock_response_spectrum(x[i0:i1 + 1], DT, fn, 10.0,
                                                pseudo_velocity=False)
            np.testing.assert_array_equal(e.srs.maximax_g, whole.maximax_g)
            assert e.peak_g == np.abs(x[i0:i1 + 1]).max()
    assert events[0].start_s == 0.0 and events[-1].end_s == (N - 1) * DT


def test_shock_detector_refuses_threshold_in_the_background():
    d = streaming.ShockDetector(DT, threshold_g=0.1, pre_s=0.01, post_s=0.01, fn_hz=[100.0],
                                max_event_s=1.0)
    with pytest.raises(InputError, match="threshold_g"):
        for c in regular(shocks_record(10_001, []), 1000):
            d.update(c)


# --------------------------------------------------------------------------
# Input checks


def test_bad_chunks_and_reuse():
    s = streaming.StatsStream(FS)
    with pytest.raises(InputError, match=r"chunk\[2\]"):
        s.update([1.0, 2.0, np.nan])
    with pytest.raises(InputError, match="one-dimensional"):
        s.update(np.zeros((3, 2)))
    s.update([1.0])
    s.result()
    with pytest.raises(InputError, match="finished"):
        s.update([1.0])
    with pytest.raises(InputError, match="fn_hz"):
        streaming.FdsStream(DT, [FS], 10.0, 5.0)
    with pytest.raises(InputError, match="b="):
        streaming.FdsStream(DT, [10.0], 10.0, -1.0)
    with pytest.raises(InputError, match="pre_s"):
        streaming.ShockDetector(DT, threshold_g=1.0, pre_s=-1, post_s=0.1, fn_hz=[10.0])
