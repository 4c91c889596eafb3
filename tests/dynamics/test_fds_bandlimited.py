"""Time-domain FDS of band-limited records at fs >= 5 fn (method="bandlimited").

Reference: the FDS of the same record upsampled 8x by FFT (scipy.signal.resample,
an implementation outside the project, of the Whittaker-Shannon interpolation of
the zero-padded record), counted by the ASTM E1049-85 rainflow rule of
fds_time at 40 to 160 samples per natural period.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy import signal

from qualplan.dynamics import fatigue as F
from qualplan.dynamics.errors import AccuracyWarning, InputError

FS = 10_000.0
DT = 1.0 / FS
PAD = 256


def _record(seed=7, n=20_000):
    # random record band-limited to 0.45 fs (a measured, anti-aliased record)
    rng = np.random.default_rng(seed)
    x = rng.standard_normal(n)
    sos = signal.butter(8, 0.45 * 2, output="sos")  # 0.45 fs of Nyquist-normalised 0.9
    return 5.0 * signal.sosfiltfilt(sos, x)


def _reference(x, fn, q, b):
    xp = np.concatenate([np.zeros(PAD), x, np.zeros(PAD)])
    x8 = signal.resample(xp, 8 * xp.size)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        d8 = F.fds_time(x8, DT / 8, fn, q, b, method="ramp")
    # the 8x reference still sees the first-order-hold loss sinc^2(fn dt/8)
    # (2.5 % of damage at fs/fn = 5, b = 12): remove it exactly for content at fn
    return d8 / np.sinc(fn * DT / 8) ** (2.0 * b)


@pytest.mark.parametrize("b", [4.0, 8.0, 12.0])
def test_within_three_percent_of_the_8x_fft_record(b):
    x = _record()
    fn = FS / np.array([20.0, 10.0, 8.0, 5.0])
    ref = _reference(x, fn, 10.0, b)
    got = F.fds_time(x, DT, fn, 10.0, b, method="bandlimited")
    np.testing.assert_allclose(got, ref, rtol=0.03)


def test_ramp_method_misses_it():
    # the piecewise-linear model loses sinc^(2b): 68 % at fs = 5 fn, b = 8 (issue 16)
    x = _record()
    fn = np.array([FS / 5.0])
    with pytest.warns(AccuracyWarning):
        got = F.fds_time(x, DT, fn, 10.0, 8.0)
    assert got[0] < 0.5 * _reference(x, fn, 10.0, 8.0)[0]


def test_free_decay_and_skip_accepted():
    x = _record(n=4000)
    fn = np.array([FS / 8.0, FS / 30.0])
    d0 = F.fds_time(x, DT, fn, 10.0, 6.0, method="bandlimited")
    d1 = F.fds_time(x, DT, fn, 10.0, 6.0, method="bandlimited", free_decay=True)
    d2 = F.fds_time(x, DT, fn, 10.0, 6.0, method="bandlimited", skip_s=0.1)
    assert np.all(d1 >= d0 * 0.999) and np.all(d2 < d0)


def test_unknown_method():
    with pytest.raises(InputError, match="method"):
        F.fds_time(np.ones(10), DT, [100.0], 10.0, 4.0, method="cubic")


def test_auto_is_the_band_limited_fds():
    # "auto" (the name shared with the SRS) is the band-limited FDS for every record:
    # the FDS goal is set against the band-limited reconstruction, and there is no
    # cubic-hold damage counter (docs/methods/between-samples.md); same numbers
    x = _record(n=4000)
    fn = np.array([200.0, 1000.0, 2000.0])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d_auto = F.fds_time(x, DT, fn, 10.0, [4.0, 8.0], method="auto")
        d_bl = F.fds_time(x, DT, fn, 10.0, [4.0, 8.0], method="bandlimited")
    np.testing.assert_array_equal(d_auto, d_bl)
