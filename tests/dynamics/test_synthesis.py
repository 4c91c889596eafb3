"""Tests of qualplan.dynamics.synthesis (Gaussian records from a PSD)."""

import numpy as np
import pytest
from scipy import signal as sps_signal
from scipy import stats as sps

from qualplan.dynamics.errors import InputError
from qualplan.dynamics.psd import grms
from qualplan.dynamics.synthesis import gaussian_from_psd

GEVS_QUAL = ([20.0, 50.0, 800.0, 2000.0], [0.026, 0.16, 0.16, 0.026])


def test_rms_equals_profile_grms():
    # closed form: the record's mean square is the PSD area on the FFT grid (df = 0.05 Hz here),
    # within O(df / f_min) of the exact area; GEVS qual 14.1356 g rms (GSFC-STD-7000)
    x = gaussian_from_psd(*GEVS_QUAL, 20.0, 8192.0, rng=np.random.default_rng(0))
    assert x.size == 163840
    assert abs(x.mean()) < 1e-12
    assert x.std() == pytest.approx(grms(*GEVS_QUAL), rel=1e-3)
    assert x.std() == pytest.approx(14.1356, rel=1e-3)


def test_amplitudes_are_gaussian_and_reproducible():
    # common practice: kurtosis 3 and skewness 0 of a Gaussian record; seeded Generator repeats
    rng = np.random.default_rng(11)
    x = gaussian_from_psd([20, 2000], [0.04, 0.04], 60.0, 5000.0, rng=rng)
    assert sps.kurtosis(x, fisher=False) == pytest.approx(3.0, abs=0.05)
    assert sps.skew(x) == pytest.approx(0.0, abs=0.03)
    y = gaussian_from_psd([20, 2000], [0.04, 0.04], 60.0, 5000.0, rng=np.random.default_rng(11))
    np.testing.assert_array_equal(x, y)


def test_welch_of_synthesis_follows_profile():
    # reference library scipy.signal.welch: flat band 0.04 g^2/Hz, 30 s, 1 Hz lines, ~60 averages
    fs = 4096.0
    x = gaussian_from_psd([20, 1000], [0.04, 0.04], 30.0, fs, rng=np.random.default_rng(5))
    f, p = sps_signal.welch(x, fs=fs, nperseg=4096)
    band = (f > 40) & (f < 900)
    assert np.mean(p[band]) == pytest.approx(0.04, rel=0.01)
    assert np.all(p[(f > 1100)] < 1e-5)


@pytest.mark.parametrize(
    ("args", "match"),
    [
        ((GEVS_QUAL[0], GEVS_QUAL[1], 1.0, 3000.0), "twice the highest"),
        ((GEVS_QUAL[0], GEVS_QUAL[1], -1.0, 8192.0), "duration_s"),
        ((GEVS_QUAL[0], GEVS_QUAL[1], 1e-5, 8192.0), "samples"),
        (([20.0], [0.01], 1.0, 8192.0), "at least 2"),
    ],
)
def test_bad_input(args, match):
    # common practice: clear errors
    with pytest.raises(InputError, match=match):
        gaussian_from_psd(*args, rng=np.random.default_rng(0))
    with pytest.raises(InputError, match="Generator"):
        gaussian_from_psd(*GEVS_QUAL, 1.0, 8192.0, rng=1)


def test_random_amplitude_record_is_gaussian_process():
    # closed form: complex normal line coefficients -> line powers exponential (chi-square 2 dof):
    # the periodogram of the whole record (one line per FFT bin) has mean G and std G
    fs, dur = 2048.0, 64.0
    x = gaussian_from_psd([20, 800], [0.04, 0.04], dur, fs, rng=np.random.default_rng(9),
                          random_amplitude=True)
    spec = np.fft.rfft(x)
    p = 2 * np.abs(spec) ** 2 / (fs * x.size)
    f = np.fft.rfftfreq(x.size, 1 / fs)
    band = (f > 30) & (f < 790)
    assert np.mean(p[band]) == pytest.approx(0.04, rel=0.03)
    assert np.std(p[band]) / np.mean(p[band]) == pytest.approx(1.0, abs=0.05)
    assert sps.kurtosis(x, fisher=False) == pytest.approx(3.0, abs=0.1)
