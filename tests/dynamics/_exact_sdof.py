"""Exact SDOF responses to sums of decaying sines (test helper).

Closed-form propagation by the matrix exponential of the oscillator augmented
by the linear ODE that generates the input (Harris' Shock and Vibration
Handbook, 6th ed., ch. 8; Van Loan 1978 for the block exponential): each
decaying sine ``a exp(-s t) sin(w t + p)`` obeys ``u'' = -2 s u' - (s^2 + w^2) u``.
The state is stepped exactly on a fine grid; peaks on that grid are within
``1 - cos(pi / n_per_period)`` of the continuous peaks (n_per_period >= 400
here: 3e-5).
"""

from __future__ import annotations

import numpy as np
from scipy import linalg

from qualplan.dynamics.units import G0_M_S2


def decaying_sines_value(t, comps):
    """Sum of ``a exp(-s t) sin(w t + p)`` over comps = [(a, s, w, p), ...]."""
    t = np.asarray(t, float)
    out = np.zeros_like(t)
    for a, s, w, p in comps:
        out += a * np.exp(-s * t) * np.sin(w * t + p)
    return out


def smooth_onset(a, s, w, t_rise):
    """Components of ``(1 - cos(pi t / t_rise)) / 2 * a exp(-s t) sin(w t)`` (t < t_rise)."""
    r = np.pi / t_rise
    return [(0.5 * a, s, w, 0.0), (-0.25 * a, s, w + r, 0.0), (-0.25 * a, s, w - r, 0.0)]


def _piece(fn, q, state, comps, t0, t1, n_per_period):
    zeta, wn = 1.0 / (2.0 * q), 2.0 * np.pi * fn
    nc = len(comps)
    m = np.zeros((2 + 2 * nc, 2 + 2 * nc))
    m[0, 1] = 1.0
    m[1, 0] = -wn * wn
    m[1, 1] = -2.0 * zeta * wn
    s = np.zeros(2 + 2 * nc)
    s[:2] = state
    for j, (a, sg, w, p) in enumerate(comps):
        i = 2 + 2 * j
        m[1, i] = -1.0  # z'' = -u - ...
        m[i, i + 1] = 1.0
        m[i + 1, i] = -(sg * sg + w * w)
        m[i + 1, i + 1] = -2.0 * sg
        e = a * np.exp(-sg * t0)
        s[i] = e * np.sin(w * t0 + p)
        s[i + 1] = e * (w * np.cos(w * t0 + p) - sg * np.sin(w * t0 + p))
    fmax = max([fn] + [abs(c[2]) / (2 * np.pi) for c in comps])
    n = max(int(np.ceil((t1 - t0) * fmax * n_per_period)), 8)
    step = linalg.expm(m * ((t1 - t0) / n))
    st = np.empty((n + 1, s.size))
    st[0] = s
    for k in range(n):
        s = step @ s
        st[k + 1] = s
    return st


def exact_extremes(fn, q, pieces, t_end, *, n_per_period=400):
    """Extremes of the exact responses during [0, t_end] and in free decay after.

    Parameters
    ----------
    fn, q : float
        Natural frequency [Hz] and Q.
    pieces : list of (t_start, components)
        The input is ``decaying_sines_value(t, components)`` from t_start to
        the next piece's start (the last piece ends at t_end); 0 after t_end.
    t_end : float
        End of the input [s].

    Returns
    -------
    dict
        For "abs_accel" [g] and "rel_disp" [m]: (max during, min during,
        max after, min after).
    """
    zeta, wn = 1.0 / (2.0 * q), 2.0 * np.pi * fn
    state = np.zeros(2)
    during = []
    starts = [p[0] for p in pieces] + [t_end]
    for j, (t0, comps) in enumerate(pieces):
        st = _piece(fn, q, state, comps, t0, starts[j + 1], n_per_period)
        during.append(st[:, :2])
        state = st[-1, :2]
    period = 1.0 / (fn * np.sqrt(1 - zeta * zeta))
    after = _piece(fn, q, state, [], 0.0, 2.0 * period, n_per_period)[:, :2]
    out = {}
    for name, fun in (("abs_accel", lambda z: -(2 * zeta * wn * z[:, 1] + wn * wn * z[:, 0])),
                      ("rel_disp", lambda z: G0_M_S2 * z[:, 0])):
        d = fun(np.vstack(during))
        a = fun(after)
        out[name] = (d.max(), d.min(), a.max(), a.min())
    return out
