"""Tests of qualplan.dynamics.stats (normal tolerance limits on log10 values)."""

import numpy as np
import pytest
from scipy import stats as sps

from qualplan.dynamics.errors import InputError
from qualplan.dynamics.stats import log_tolerance_limits, tolerance_factor

# NASA-HDBK-7005 / Owen 1963 (SCR-607) one-sided normal tolerance factors, recomputed with
# scipy.stats.nct (95/50 row from memory of the tables: "1.94 at n = 3, 1.70 at n = 10"
# recalled from the NASA-HDBK-7005 / NASA-STD-7001 tables).
K_95_50 = {2: 2.3387, 3: 1.9384, 4: 1.8295, 5: 1.7793, 6: 1.7505, 7: 1.7318, 8: 1.7187,
           9: 1.7091, 10: 1.7016, 15: 1.6808, 20: 1.6712, 50: 1.6549}
K_95_90 = {2: 13.090, 3: 5.3115, 4: 3.9566, 5: 3.3998, 6: 3.0919, 7: 2.8938, 8: 2.7543,
           9: 2.6499, 10: 2.5684, 15: 2.3290, 20: 2.2078, 50: 1.9653}
# Natrella, Experimental Statistics (NBS Handbook 91, 1963), Table A-7 one-sided factors K for
# gamma = 0.95, P = 0.95 (from memory): n = 5: 4.202, 10: 2.911, 20: 2.396.
K_95_95 = {5: 4.202, 10: 2.911, 20: 2.396}


@pytest.mark.parametrize(("n", "k"), sorted(K_95_50.items()))
def test_k_95_50_table(n, k):
    # NASA-HDBK-7005 / Owen 1963 table (tolerance 5e-4)
    assert tolerance_factor(n) == pytest.approx(k, abs=5e-4)


@pytest.mark.parametrize(("n", "k"), sorted(K_95_90.items()))
def test_k_95_90_table(n, k):
    # Owen 1963 table, recomputed with scipy.stats.nct (from memory of the print)
    assert tolerance_factor(n, 0.95, 0.90) == pytest.approx(k, abs=5e-4)


@pytest.mark.parametrize(("n", "k"), sorted(K_95_95.items()))
def test_k_95_95_natrella(n, k):
    # Natrella, NBS Handbook 91, Table A-7 (from memory), 3 decimals printed
    assert tolerance_factor(n, 0.95, 0.95) == pytest.approx(k, abs=1.5e-3)


def test_k_tends_to_normal_quantile():
    # closed form: k -> z_beta as n -> inf; at confidence 0.5 k(n) > z_beta and decreasing
    assert tolerance_factor(100000) == pytest.approx(sps.norm.ppf(0.95), abs=1e-4)
    ks = [tolerance_factor(n) for n in range(2, 30)]
    assert all(a > b for a, b in zip(ks, ks[1:], strict=False))
    assert tolerance_factor(10, coverage=0.99, confidence=0.5) > tolerance_factor(10)


def test_k_monte_carlo_coverage():
    # closed form definition: P(coverage of xbar + k s >= beta) = gamma, checked by simulation
    rng = np.random.default_rng(7)
    n, beta, gamma = 4, 0.9, 0.75
    k = tolerance_factor(n, beta, gamma)
    x = rng.standard_normal((100_000, n))
    lim = x.mean(axis=1) + k * x.std(axis=1, ddof=1)
    hit = (sps.norm.cdf(lim) >= beta).mean()
    assert hit == pytest.approx(gamma, abs=0.006)  # 3.5 sigma of binomial noise


def test_p95_50_example():
    # NASA-HDBK-7005 log-normal limit, recomputed: 0.02, 0.03, 0.05 -> log10 mean -1.50763,
    # s 0.19941,
    # P95/50 = 0.075668 g^2/Hz (1.80 dB above the maximum)
    r = log_tolerance_limits(np.array([[0.02, 1.0], [0.03, 1.0], [0.05, 1.0]]))
    assert r.n == 3
    assert r.k_factor == pytest.approx(1.9384, abs=5e-4)
    assert np.log10(r.mean_p50[0]) == pytest.approx(-1.50763, abs=1e-5)
    assert r.std_log10[0] == pytest.approx(0.19941, abs=1e-5)
    assert r.upper[0] == pytest.approx(0.075668, rel=1e-4)
    assert 10 * np.log10(r.upper[0] / r.maximum[0]) == pytest.approx(1.80, abs=0.005)
    np.testing.assert_allclose(r.maximum, [0.05, 1.0])
    # identical spectra: zero spread, every statistic equals the data (closed form)
    assert r.upper[1] == pytest.approx(1.0) and r.mean_p50[1] == pytest.approx(1.0)


def test_dB_and_log10_give_the_same_limit():
    # closed form: computing in dB gives the identical result (scale invariance)
    rng = np.random.default_rng(3)
    x = 10 ** rng.normal(-2, 0.3, size=(5, 40))
    r = log_tolerance_limits(x)
    db = 10 * np.log10(x)
    up_db = db.mean(axis=0) + r.k_factor * db.std(axis=0, ddof=1)
    np.testing.assert_allclose(10 * np.log10(r.upper), up_db, rtol=1e-12)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"n": 1}, "n >= 2"),
        ({"n": 0}, "n >= 2"),
        ({"n": 2.5}, "integer"),
        ({"n": 5, "coverage": 1.0}, "between 0 and 1"),
        ({"n": 5, "confidence": 0.0}, "between 0 and 1"),
        ({"n": 5, "coverage": float("nan")}, "between 0 and 1"),
    ],
)
def test_tolerance_factor_bad_input(kwargs, match):
    # common practice: a clear error, never a silent default for n < 2
    with pytest.raises(InputError, match=match):
        tolerance_factor(**kwargs)


def test_limits_bad_input():
    # common practice: clear errors naming the element
    with pytest.raises(InputError, match="at least 2 spectra"):
        log_tolerance_limits(np.ones((1, 5)))
    with pytest.raises(InputError, match="2-D"):
        log_tolerance_limits(np.ones(5))
    with pytest.raises(InputError, match=r"values\[1, 2\].*> 0"):
        log_tolerance_limits(np.array([[1.0, 1, 1], [1, 1, 0]]))
    with pytest.raises(InputError, match="finite"):
        log_tolerance_limits(np.array([[1.0, np.nan], [1, 1]]))
