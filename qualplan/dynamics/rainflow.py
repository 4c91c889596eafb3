"""Rainflow cycle counting per ASTM E1049-85 (reapproved 2017), section 5.4.4.

Two compiled passes: the turning points (reversals) of the series, then the
three-point rainflow count of those reversals. The same kernels, fused with the
Miner sum, serve the time-domain fatigue damage spectrum
(:func:`qualplan.dynamics.fatigue.fds_time`).

References
----------
.. [1] ASTM E1049-85 (Reapproved 2017), "Standard Practices for Cycle Counting
   in Fatigue Analysis", section 5.4.4 (rainflow counting) and its worked
   example (Fig. 6 / X1).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from qualplan.dynamics._validate import as_1d_float, positive_scalar

__all__ = ["count", "reversals", "damage"]


@njit(cache=True, nogil=True)
def _reversals(x, out):
    """Write the turning points of `x` into `out`; return how many.

    The first and last samples are always kept; runs of equal samples count
    once (a plateau is not a reversal unless the slope changes sign across it).
    """
    n = x.shape[0]
    if n == 0:
        return 0
    out[0] = x[0]
    if n == 1:
        return 1
    k = 1
    xc = x[1]
    dl = xc - x[0]
    for i in range(2, n):
        xn = x[i]
        if xn == xc:
            continue
        dn = xn - xc
        if dl * dn < 0.0:
            out[k] = xc
            k += 1
        xc = xn
        dl = dn
    out[k] = x[n - 1]
    return k + 1


@njit(cache=True, nogil=True)
def _count(tp, out):
    """Three-point rainflow count of reversals `tp`; rows of `out`: range, mean, count."""
    n = tp.shape[0]
    stack = np.empty(n, dtype=np.float64)
    sp = 0
    k = 0
    for i in range(n):
        stack[sp] = tp[i]
        sp += 1
        while sp >= 3:
            x_rng = abs(stack[sp - 1] - stack[sp - 2])
            y_rng = abs(stack[sp - 2] - stack[sp - 3])
            if x_rng < y_rng:
                break
            if sp == 3:
                # Y contains the starting point: half cycle, discard the first point
                out[k, 0] = y_rng
                out[k, 1] = 0.5 * (stack[0] + stack[1])
                out[k, 2] = 0.5
                k += 1
                stack[0] = stack[1]
                stack[1] = stack[2]
                sp = 2
            else:
                # full cycle Y: discard its peak and valley
                out[k, 0] = y_rng
                out[k, 1] = 0.5 * (stack[sp - 3] + stack[sp - 2])
                out[k, 2] = 1.0
                k += 1
                stack[sp - 3] = stack[sp - 1]
                sp -= 2
    for j in range(sp - 1):
        out[k, 0] = abs(stack[j + 1] - stack[j])
        out[k, 1] = 0.5 * (stack[j] + stack[j + 1])
        out[k, 2] = 0.5
        k += 1
    return k


@njit(cache=True, nogil=True)
def push_reversal(stack, sp, val, b):
    """Push a reversal on the ASTM E1049-85 (5.4.4) rainflow stack and count what it closes.

    Returns the new stack depth and the damage counted, sum of count x (range/2)^b
    (a half cycle when the stack's starting point is involved).
    """
    stack[sp] = val
    sp += 1
    d = 0.0
    while sp >= 3:
        x_rng = abs(stack[sp - 1] - stack[sp - 2])
        y_rng = abs(stack[sp - 2] - stack[sp - 3])
        if x_rng < y_rng:
            break
        if sp == 3:
            d += 0.5 * math.pow(0.5 * y_rng, b)
            stack[0] = stack[1]
            stack[1] = stack[2]
            sp = 2
        else:
            d += math.pow(0.5 * y_rng, b)
            stack[sp - 3] = stack[sp - 1]
            sp -= 2
    return sp, d


@njit(cache=True, nogil=True)
def push_reversal_bs(stack, sp, val, bs, d):
    """:func:`push_reversal` for several Basquin exponents at once: the cycles closed are
    the same for every b (the count does not depend on b); `d[j]` receives the damage
    they do for `bs[j]`, summed in the same order as push_reversal sums it, so that each
    equals push_reversal's value bit for bit. Returns the new stack depth."""
    stack[sp] = val
    sp += 1
    nb = bs.shape[0]
    for j in range(nb):
        d[j] = 0.0
    while sp >= 3:
        x_rng = abs(stack[sp - 1] - stack[sp - 2])
        y_rng = abs(stack[sp - 2] - stack[sp - 3])
        if x_rng < y_rng:
            break
        if sp == 3:
            for j in range(nb):
                d[j] += 0.5 * math.pow(0.5 * y_rng, bs[j])
            stack[0] = stack[1]
            stack[1] = stack[2]
            sp = 2
        else:
            for j in range(nb):
                d[j] += math.pow(0.5 * y_rng, bs[j])
            stack[sp - 3] = stack[sp - 1]
            sp -= 2
    return sp


@njit(cache=True, nogil=True)
def residue_damage(stack, sp, b):
    """Damage of the half cycles left on the stack at the end of the history."""
    d = 0.0
    for j in range(sp - 1):
        d += 0.5 * math.pow(0.5 * abs(stack[j + 1] - stack[j]), b)
    return d


@njit(cache=True, nogil=True)
def _miner_sum(tp, b, stack):
    """Sum of count * (range/2)^b over the rainflow cycles of reversals `tp`."""
    sp = 0
    d = 0.0
    for i in range(tp.shape[0]):
        sp, di = push_reversal(stack, sp, tp[i], b)
        d += di
    return d + residue_damage(stack, sp, b)


def reversals(series) -> np.ndarray:
    """Turning points (reversals) of a series, first and last samples included.

    Parameters
    ----------
    series : array_like, shape (n,)
        The loading history. [any unit]

    Returns
    -------
    numpy.ndarray, shape (m,)
        Values at the reversals, in order. [same unit as `series`]
    """
    x = as_1d_float("series", series)
    out = np.empty(x.size, dtype=np.float64)
    k = _reversals(x, out)
    return out[:k].copy()


def count(series) -> np.ndarray:
    """Rainflow-count a series (ASTM E1049-85 section 5.4.4).

    Parameters
    ----------
    series : array_like, shape (n,)
        The loading history (stress, response acceleration, ...). [any unit]

    Returns
    -------
    numpy.ndarray, shape (k, 3)
        One row per cycle in the order counted: range [unit of `series`],
        mean [unit of `series`], count (1.0 for a full cycle, 0.5 for a half
        cycle). [unitless for the count]

    Notes
    -----
    Reversals are extracted first (first and last samples kept, plateaus
    merged). Then, with X the most recent range and Y the one before it: while
    X >= Y, Y is counted as a full cycle and its two points are discarded, or as
    a half cycle when Y contains the starting point (only that point is
    discarded). The ranges left at the end are half cycles. This is the
    procedure of ASTM E1049-85 section 5.4.4; the cycle sequence equals that of
    the general-purpose ``rainflow`` package (``extract_cycles``).

    References
    ----------
    .. [1] ASTM E1049-85 (R2017), section 5.4.4.

    Examples
    --------
    >>> count([-2, 1, -3, 5, -1, 3, -4, 4, -2])[:, [0, 2]].tolist()
    [[3.0, 0.5], [4.0, 0.5], [4.0, 1.0], [8.0, 0.5], [9.0, 0.5], [8.0, 0.5], [6.0, 0.5]]
    """
    x = as_1d_float("series", series)
    tp = np.empty(x.size, dtype=np.float64)
    m = _reversals(x, tp)
    out = np.empty((max(m - 1, 0), 3), dtype=np.float64)
    k = _count(tp[:m], out)
    return out[:k]


def damage(series, b: float) -> float:
    """Miner sum of the rainflow cycles of a series with unit material constants.

    Parameters
    ----------
    series : array_like, shape (n,)
        The loading history. [any unit, say u]
    b : float
        Basquin exponent (N S^b = C, S = amplitude = range / 2). [unitless]

    Returns
    -------
    float
        D = sum over cycles of count * (range / 2)^b. [u^b]
    """
    b = positive_scalar("b", b)
    x = as_1d_float("series", series)
    tp = np.empty(x.size, dtype=np.float64)
    m = _reversals(x, tp)
    stack = np.empty(max(m, 1), dtype=np.float64)
    return float(_miner_sum(tp[:m], b, stack))
