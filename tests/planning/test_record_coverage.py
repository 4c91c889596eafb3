"""The life's FDS and ERS of a measured record take the record as the samples of a
band-limited signal: a band-limited random record (10-800 Hz at 2048 Hz) against the same
record upsampled 8x by FFT (scipy.signal.resample; the 8x reference's own first-order-hold
loss sinc^(2b)(fn dt / 8) removed, Smallwood 1981 ramp-invariant filter). The
piecewise-linear input model read the FDS 20 % low at fs = 13.6 fn (b = 12): an
unconservative coverage of the life."""

from __future__ import annotations

import warnings

import numpy as np
from scipy import signal

from qualplan.dynamics import extreme, fatigue
from qualplan.planning.coverage import _record


def test_record_fds_and_ers_within_3_percent_of_the_8x_reference_up_to_fs_over_5():
    fs = 2048.0
    rng = np.random.default_rng(11)
    x = rng.normal(0.0, 1.0, int(20 * fs))
    bb, aa = signal.butter(8, [10 / (fs / 2), 800 / (fs / 2)], "band")
    x = signal.lfilter(bb, aa, x)
    fn = np.array([50.0, 100.0, 150.0, 204.8, 300.0, 409.6])  # fs/fn = 41 ... 5
    bs = [4.0, 8.0, 12.0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        got = _record("run", x, 1 / fs, 1.0, fn, 10.0, bs)
        x8 = signal.resample(x, 8 * x.size)
        ref = fatigue.fds_time(x8, 1 / (8 * fs), fn, 10.0, bs, free_decay=True)
        ref_ers = extreme.ers_shock(x8, 1 / (8 * fs), fn, 10.0)
    for j, b in enumerate(bs):
        expected = ref[j] / np.sinc(fn / (8 * fs)) ** (2 * b)
        np.testing.assert_allclose(got.fds[b], expected, rtol=0.03)
    np.testing.assert_allclose(got.ers, ref_ers, rtol=0.02)
