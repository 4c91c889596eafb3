"""Extreme response spectra (qualplan.dynamics.extreme)."""

import math
import warnings

import numpy as np
import pytest

from qualplan.dynamics import extreme, sdof, sdof_filter, sine, synthesis
from qualplan.dynamics.errors import AccuracyWarning, InputError

G0 = 9.80665
FLAT = ([20.0, 2000.0], [0.04, 0.04])


@pytest.mark.parametrize(
    "n, u0, u",
    [
        # Lalanne vol. 3 / Davenport 1964 (recomputed): n0+ T = 100 x 60, 100 x 3600, 100 x 120
        (6000, 4.1712, 4.3096),
        (360000, 5.0584, None),
        (12000, 4.3342, None),
    ],
)
def test_peak_factors(n, u0, u):
    assert extreme.peak_factor(n, method="u0") == pytest.approx(u0, abs=5e-5)
    if u is not None:
        assert extreme.peak_factor(n) == pytest.approx(u, abs=5e-5)


def test_domain_ers_values_with_miles_rms():
    # Lalanne vol. 5 / Davenport 1964: flat 0.04, fn 100, Q 10: 60 s -> 33.06 g (u0) /
    # 34.16 g (Davenport);
    # 3600 s -> 40.10 / 41.00 g; GEVS qual 120 s -> 68.71 g (u0) (Miles rms, n0+ = fn)
    miles = sdof.miles_grms(100.0, 10.0, 0.04)
    assert miles * extreme.peak_factor(6000, method="u0") == pytest.approx(33.06, abs=0.005)
    assert miles * extreme.peak_factor(6000) == pytest.approx(34.16, abs=0.005)
    assert miles * extreme.peak_factor(360000, method="u0") == pytest.approx(40.10, abs=0.005)
    assert miles * extreme.peak_factor(360000) == pytest.approx(41.00, abs=0.005)
    assert sdof.miles_grms(100, 10, 0.16) * extreme.peak_factor(12000, method="u0") == (
        pytest.approx(68.71, abs=0.005))


def test_ers_random_exact_moments():
    # Rice (1944-45), recomputed: exact pseudo-acceleration rms 7.8746 g and n0+ = 100.49 Hz
    u0 = math.sqrt(2 * math.log(100.49 * 60))
    e = extreme.ers_random(*FLAT, 60.0, [100.0], 10.0)
    assert e[0] == pytest.approx(7.8746 * (u0 + 0.5772 / u0), rel=2e-4)
    e0 = extreme.ers_random(*FLAT, 60.0, [100.0], 10.0, method="u0")
    assert e0[0] == pytest.approx(7.8746 * u0, rel=2e-4)
    # absolute max: twice the crossings (Davenport 1964: 35.19 g for 2 n0+ T)
    e2 = extreme.ers_random(*FLAT, 60.0, [100.0], 10.0, two_sided=True)
    assert e2[0] == pytest.approx(35.19, abs=0.01)


def test_ers_random_versus_largest_peak_of_synthesised_records():
    # Monte Carlo (recomputed): abs max over 60 x 60 s has mean 34.51 g vs Davenport
    # 35.19 g (clumping of narrow-band peaks lowers it ~2 %); here 16 records x 60 s.
    fs = 10000.0
    peaks = []
    wn2 = (2 * math.pi * 100) ** 2 / G0
    for seed in range(16):
        a = synthesis.gaussian_from_psd(*FLAT, 60.0, fs, rng=np.random.default_rng(100 + seed))
        z = sdof_filter.response(a, 1 / fs, [100.0], 10.0, output="rel_disp")[0]
        peaks.append(np.abs(z).max() * wn2)
    ers = extreme.ers_random(*FLAT, 60.0, [100.0], 10.0, two_sided=True)[0]
    mean = float(np.mean(peaks))
    print(f"mean largest |peak| {mean:.2f} g, Davenport ERS {ers:.2f} g, ratio {mean / ers:.3f}")
    assert mean == pytest.approx(ers, rel=0.05)
    assert mean < ers  # clumping: simulated maxima a little below Davenport


def test_ers_sine():
    # closed form: sine 1 g at 100 Hz, Q 10: ERS 10.00 g at fn, 10.0125 g max over f
    assert extreme.ers_sine_dwell(100.0, 1.0, [100.0], 10.0)[0] == pytest.approx(10.0)
    sw = sine.Sweep(sine.sine_spec(5, 500, [("acceleration", 1.0)]), 2.0)
    assert extreme.ers_sweep(sw, [100.0], 10.0)[0] == pytest.approx(10.0125, abs=5e-5)
    # outside the band: off-resonance steady response (closed form)
    out = extreme.ers_sweep(sine.Sweep(sine.sine_spec(5, 50, [("acceleration", 1.0)]), 2.0),
                            [100.0], 10.0)
    r = 0.5
    assert out[0] == pytest.approx(1 / math.sqrt((1 - r * r) ** 2 + (r / 10) ** 2), rel=1e-9)


def test_ers_shock_half_sine():
    # exact solution (Harris ch. 8): half-sine 100 g, 11 ms, Q 10: maximax abs accel
    # 40.518 / 159.140 /
    # 100.756 g at 10 / 100 / 1000 Hz; pseudo-velocity 6.292 / 2.479 m/s at 10 / 100 Hz
    fs = 100000.0
    t = np.arange(int(0.011 * fs) + 1) / fs
    x = np.concatenate([100 * np.sin(np.pi * t / 0.011), np.zeros(20000)])
    fn = np.array([10.0, 100.0, 1000.0])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AccuracyWarning)
        aa = extreme.ers_shock(x, 1 / fs, fn, 10.0, output="abs_accel")
        pa = extreme.ers_shock(x, 1 / fs, fn, 10.0)
    np.testing.assert_allclose(aa, [40.518, 159.140, 100.756], rtol=1e-3)
    pv = pa[:2] * G0 / (2 * math.pi * fn[:2])
    np.testing.assert_allclose(pv, [6.292, 2.479], rtol=1e-3)


def test_bad_input():
    with pytest.raises(InputError, match="q="):
        extreme.ers_random(*FLAT, 60, [100.0], 0.4)
    with pytest.raises(InputError, match="duration_s"):
        extreme.ers_random(*FLAT, -1, [100.0], 10)
    with pytest.raises(InputError, match="n_crossings"):
        extreme.ers_random(*FLAT, 0.001, [100.0], 10)
    with pytest.raises(InputError, match="method"):
        extreme.ers_random(*FLAT, 60, [100.0], 10, method="mean")
    with pytest.raises(InputError, match="output"):
        extreme.ers_shock(np.zeros(10), 1e-4, [100.0], 10, output="rel_disp")
    with pytest.warns(AccuracyWarning, match="outside the PSD band"):
        extreme.ers_random(*FLAT, 60, [3000.0], 10)
