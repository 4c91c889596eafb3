"""Time-domain FDS for several Basquin exponents in one pass (issue 12, derivation speed).

The SDOF response, its reversals and its rainflow cycles do not depend on b; only the
damage per cycle (range/2)^b does. ``fatigue.fds_time`` given a sequence of b runs each
oscillator once and must give, row by row, what the call with each b alone gives
(the old path); the cycles it counts must be those of ASTM E1049-85 (reference library
``rainflow``, test-only dependency).
"""

import warnings

import numpy as np
import pytest
import rainflow as rainflow_ref  # reference library (test-only)

from qualplan.dynamics import extreme, fatigue, sdof_filter
from qualplan.dynamics.errors import AccuracyWarning, InputError

G0 = 9.80665
BS = (4.0, 6.4, 8.0, 12.0)
RNG = np.random.default_rng(12)
X = RNG.standard_normal(60_000)
DT = 1 / 20_000
FN = np.geomspace(20.0, 2000.0, 25)


@pytest.mark.parametrize("options", [
    {}, {"free_decay": True}, {"skip_s": 0.3}, {"interpolate_peaks": False},
    {"method": "bandlimited"}, {"method": "bandlimited", "free_decay": True, "skip_s": 0.1},
    {"workers": 1},
])
def test_several_b_equal_each_b_alone(options):
    # the new path against the old one (one call per b): equal to 1e-12 relative (in fact
    # bit for bit: the damage is summed in the same order)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        several = fatigue.fds_time(X, DT, FN, 10.0, list(BS), **options)
        alone = np.array([fatigue.fds_time(X, DT, FN, 10.0, b, **options) for b in BS])
    assert several.shape == (len(BS), FN.size)
    assert np.all(alone > 0)
    np.testing.assert_allclose(several, alone, rtol=1e-12, atol=0)


def test_several_b_count_the_reference_rainflow_cycles_exactly():
    # reference library rainflow 3.2 (ASTM E1049-85 5.4.4) on the response of
    # sdof_filter.response, raw samples: b = 0 makes each cycle's damage its count, so the
    # one-pass kernel's sum for b = 0 is the number of cycles (half cycles 0.5) - equal
    # exactly; the damage for the other b equals the reference Miner sum (as
    # test_fatigue.test_fds_time_equals_reference_rainflow_on_filtered_response)
    x = X[:30_000]
    fn = np.array([50.0, 300.0, 1500.0])
    bz, az = sdof_filter.coefficients(fn, 10.0, DT, output="rel_disp")
    z = sdof_filter.response(x, DT, fn, 10.0, output="rel_disp")
    bs = np.array([0.0, 4.0, 8.0])
    scale = (2 * np.pi * fn) ** 2 / G0
    out = np.empty((fn.size, bs.size))
    peak = np.empty(fn.size)
    fatigue._filter_miner_bank(np.ascontiguousarray(x), bz * scale[:, None], az,
                               np.zeros(fn.size, dtype=np.int64), bs, False, 0, out, peak)
    # the largest |response| of the pass (sdof_filter's response, scaled: rounding apart)
    np.testing.assert_allclose(peak, np.max(np.abs(z), axis=1) * scale, rtol=1e-12)
    for i in range(fn.size):
        cycles = list(rainflow_ref.extract_cycles(z[i] * scale[i]))
        assert out[i, 0] == sum(n for _r, _m, n, *_ in cycles)
        for j, b in enumerate(bs[1:], start=1):
            ref = sum(n * (r / 2) ** b for r, _m, n, *_ in cycles)
            assert out[i, j] == pytest.approx(ref, rel=1e-9)


def test_several_b_give_the_warnings_of_each_b():
    # fn = 2000 Hz at fs = 20 kHz: sinc^2 loss of the ramp-invariant filter, 1 - sinc(0.1)^(2b)
    # (the fds_time warning rule), a different percentage per b
    fn = [500.0, 2000.0]
    with warnings.catch_warnings(record=True) as several:
        warnings.simplefilter("always")
        fatigue.fds_time(X, DT, fn, 10.0, [4.0, 12.0])
    with warnings.catch_warnings(record=True) as alone:
        warnings.simplefilter("always")
        for b in (4.0, 12.0):
            fatigue.fds_time(X, DT, fn, 10.0, b)
    assert [str(w.message) for w in several] == [str(w.message) for w in alone]
    assert len(several) == 2


def test_several_b_bad_exponent_named():
    with pytest.raises(InputError, match="b"):
        fatigue.fds_time(X, DT, FN, 10.0, [8.0, -1.0])
    with pytest.raises(InputError, match="b"):
        fatigue.fds_time(X, DT, FN, 10.0, [])


def test_peak_of_the_fds_pass_is_the_ers():
    # issue 12 speed: the ERS of a record comes from the FDS's filter pass. Closed form:
    # the maximax pseudo-acceleration wn^2 max|z| / g0 (fatigue's rel-disp filter scaled
    # by wn^2 / g0) equals wn x the pseudo-velocity maximax (extreme.ers_shock, the
    # pseudo-velocity filter = wn x the same rel-disp filter) up to rounding; the peaks
    # of the free decay after its first period are lower, so ers_shock's one-period
    # residual and the FDS's 1e-4 decay give the same maximum. The damage is unchanged
    # bit for bit.
    t = np.arange(4000) * DT
    shock = np.where(t < 0.011, 100.0 * np.sin(np.pi * t / 0.011), 0.0)  # half-sine
    fn = FN[FN < 0.1 / DT]
    for x in (X, shock):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", AccuracyWarning)
            d, peak = fatigue.fds_time(x, DT, fn, 10.0, list(BS), free_decay=True,
                                       return_peak=True)
            d_alone = fatigue.fds_time(x, DT, fn, 10.0, list(BS), free_decay=True)
            ers = extreme.ers_shock(x, DT, fn, 10.0)
        assert np.array_equal(d, d_alone)
        np.testing.assert_allclose(peak, ers, rtol=1e-11)
    # the warnings ers_shock gives are still there for callers that skip it
    with pytest.warns(AccuracyWarning) as caught:
        extreme.ers_shock(X, DT, fn, 10.0)
    assert set(extreme.ers_shock_warnings(X, DT, fn)) == {str(w.message) for w in caught}
    with pytest.raises(InputError, match="return_peak"):
        fatigue.fds_time(X, DT, fn, 10.0, 8.0, return_peak=True)


def test_band_limited_peaks_from_the_fds_pass_are_the_band_limited_ers():
    # method "bandlimited" with return_peak: the peaks of the reconstructed response
    # (>= 20 samples per period) against extreme.ers_shock(method="bandlimited") and the
    # ERS of the record upsampled 8x by FFT (scipy.signal.resample); within 1.2 %, the
    # bound of peaks taken at 20 samples per period (1 - cos(pi / 20), closed form). The
    # damage equals the call without return_peak.
    from scipy import signal

    sos = signal.butter(8, [20 * 2 * DT, 3000 * 2 * DT], "band", output="sos")
    x = signal.sosfilt(sos, X)
    fn = FN[FN <= 0.2 / DT]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        d, peak = fatigue.fds_time(x, DT, fn, 10.0, list(BS), free_decay=True,
                                   method="bandlimited", return_peak=True)
        d_alone = fatigue.fds_time(x, DT, fn, 10.0, list(BS), free_decay=True,
                                   method="bandlimited")
        ers_bl = extreme.ers_shock(x, DT, fn, 10.0, method="bandlimited")
        ref = extreme.ers_shock(signal.resample(x, 8 * x.size), DT / 8, fn, 10.0)
    assert np.array_equal(d, d_alone)
    bound = 1 - np.cos(np.pi / 20)
    np.testing.assert_allclose(peak, ref, rtol=bound)
    np.testing.assert_allclose(peak, ers_bl, rtol=bound)
