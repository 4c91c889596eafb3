"""Statistical limits of several measured spectra (PSD or SRS) of one environment.

Environments are treated as log-normal: at each frequency the log10 values of the
n measurements are assumed normal. The normal tolerance limit
``NTL(beta, gamma) = 10^(ybar + k s)`` covers a proportion beta of the population
with confidence gamma; the maximum predicted (expected) environment of
NASA-HDBK-7005 is the P95/50 limit (beta 0.95, gamma 0.50).

See docs/methods/stats.md.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats as _sps

from qualplan.dynamics.errors import InputError

__all__ = ["tolerance_factor", "log_tolerance_limits", "LogToleranceLimits"]


def _probability(field: str, value) -> float:
    try:
        p = float(value)
    except (TypeError, ValueError) as exc:
        raise InputError(field, value, "must be a number in (0, 1)") from exc
    if not (0.0 < p < 1.0):
        raise InputError(field, value, "must be strictly between 0 and 1")
    return p


def _count(n) -> int:
    if isinstance(n, bool) or not isinstance(n, int | np.integer):
        try:
            as_float = float(n)
        except (TypeError, ValueError) as exc:
            raise InputError("n", n, "must be an integer >= 2") from exc
        if not as_float.is_integer():
            raise InputError("n", n, "must be an integer >= 2")
        n = int(as_float)
    n = int(n)
    if n < 2:
        raise InputError(
            "n", n, "needs at least 2 measurements to estimate a spread (n >= 2)"
        )
    return n


def tolerance_factor(n: int, coverage: float = 0.95, confidence: float = 0.50) -> float:
    """Exact one-sided normal tolerance factor k.

    Parameters
    ----------
    n : int
        Number of measurements (sample size), >= 2.
    coverage : float
        Proportion beta of the population below the limit, in (0, 1) [unitless].
    confidence : float
        Confidence gamma that at least `coverage` lies below, in (0, 1) [unitless].

    Returns
    -------
    float
        k [unitless] such that ``P( P(X <= xbar + k s) >= beta ) = gamma``.

    Notes
    -----
    ``k = t'_{gamma}(n - 1, z_beta sqrt(n)) / sqrt(n)``, where ``t'`` is the
    quantile of the non-central t distribution with n - 1 degrees of freedom and
    non-centrality ``z_beta sqrt(n)``, ``z_beta`` the standard normal quantile.
    k(95/50): 2.3387 (n = 2), 1.9384 (3), 1.7016 (10), -> 1.6449 as n -> inf.

    References
    ----------
    Owen, D. B., "Factors for one-sided tolerance limits and for variables
    sampling plans", Sandia Corporation Monograph SCR-607, 1963.
    NASA-HDBK-7005, Dynamic Environmental Criteria, 2001 (normal tolerance limits).
    """
    n = _count(n)
    beta = _probability("coverage", coverage)
    gamma = _probability("confidence", confidence)
    nc = _sps.norm.ppf(beta) * math.sqrt(n)
    k = float(_sps.nct.ppf(gamma, n - 1, nc)) / math.sqrt(n)
    if not math.isfinite(k):
        raise InputError(
            "confidence", confidence,
            f"gives no finite tolerance factor for n={n}, coverage={beta}",
        )
    return k


@dataclass(frozen=True, eq=False)
class LogToleranceLimits:
    """Per-frequency statistics of n spectra on log10 values.

    Attributes
    ----------
    mean_p50 : ndarray
        ``10^ybar``: the log-normal median (P50) [unit of the input].
    upper : ndarray
        ``10^(ybar + k s)``: normal tolerance limit, P95/50 by default [unit of the input].
    maximum : ndarray
        Plain maximum envelope of the n spectra [unit of the input].
    std_log10 : ndarray
        Sample standard deviation s (n - 1) of log10 values [log10 units]
        (x10 for dB on power, x20 for dB on amplitude).
    k_factor : float
        Tolerance factor used [unitless].
    n : int
        Number of spectra.
    coverage, confidence : float
        beta and gamma of the limit.
    """

    mean_p50: np.ndarray
    upper: np.ndarray
    maximum: np.ndarray
    std_log10: np.ndarray
    k_factor: float
    n: int
    coverage: float
    confidence: float


def log_tolerance_limits(values, *, coverage: float = 0.95,
                         confidence: float = 0.50) -> LogToleranceLimits:
    """P50, normal tolerance limit (P95/50 by default) and maximum of n spectra.

    Parameters
    ----------
    values : array_like, shape (n_spectra, n_freq)
        Positive values of the n spectra on one common frequency axis (ASD
        [g^2/Hz] or SRS [g]; the computation on log10 values is the same for
        power and amplitude). n_spectra >= 2.
    coverage, confidence : float
        beta and gamma in (0, 1), default 0.95 and 0.50.

    Returns
    -------
    LogToleranceLimits

    Raises
    ------
    InputError
        Fewer than 2 spectra, a non-2-D array, NaN/inf, zero or negative values.

    Notes
    -----
    ``y = log10(x)``; ``ybar`` and ``s`` (n - 1 divisor) per frequency;
    ``upper = 10^(ybar + k s)`` with ``k = tolerance_factor(n, coverage, confidence)``.

    References
    ----------
    NASA-HDBK-7005 (2001), Dynamic Environmental Criteria, normal tolerance limits.
    """
    try:
        x = np.asarray(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError("values", values, "must be numbers") from exc
    if x.ndim != 2:
        raise InputError("values", f"shape {x.shape}", "must be 2-D (n_spectra, n_freq)")
    if x.shape[0] < 2:
        raise InputError(
            "values", f"{x.shape[0]} spectrum",
            "needs at least 2 spectra (n >= 2) for a tolerance limit",
        )
    if x.shape[1] < 1:
        raise InputError("values", f"shape {x.shape}", "needs at least one frequency")
    bad = ~np.isfinite(x)
    if bad.any():
        i, j = np.argwhere(bad)[0]
        raise InputError(f"values[{i}, {j}]", float(x[i, j]), "must be finite (no NaN or inf)")
    if (x <= 0).any():
        i, j = np.argwhere(x <= 0)[0]
        raise InputError(f"values[{i}, {j}]", float(x[i, j]), "must be > 0")
    n = x.shape[0]
    k = tolerance_factor(n, coverage, confidence)
    y = np.log10(x)
    ybar = y.mean(axis=0)
    s = y.std(axis=0, ddof=1)
    return LogToleranceLimits(
        mean_p50=10.0 ** ybar,
        upper=10.0 ** (ybar + k * s),
        maximum=x.max(axis=0),
        std_log10=s,
        k_factor=k,
        n=n,
        coverage=float(coverage),
        confidence=float(confidence),
    )
