"""Log-log breakpoint profiles: the machinery shared by PSD and SRS profiles.

A *profile* is a list of breakpoints ``(freq_hz[i], values[i])`` with strictly
increasing frequencies > 0 and values > 0, joined by straight lines in log-log
axes: on segment ``i`` the value is ``v_i (f / f_i) ** n_i`` with the log-log
exponent ``n_i = ln(v_{i+1}/v_i) / ln(f_{i+1}/f_i)``. A PSD (power, g^2/Hz) and
an SRS (amplitude, g) use the same geometry; only the dB convention differs
(10 log10 for power, 20 log10 for amplitude).

Conventions (documented in docs/methods/psd.md):

- Outside its band ``[freq_hz[0], freq_hz[-1]]`` a profile is 0.0 (no energy,
  no requirement). Inside it, log-log interpolation; exactly at a breakpoint the
  breakpoint value.
- dB/oct uses the exact 10 log10(2) = 3.0103 dB per unit exponent for power
  (6.0206 for amplitude), see ``units.DB_PER_OCT_UNIT``.

This module is internal (leading underscore); ``psd`` and ``srs`` wrap it with
unit-named public functions.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from qualplan.dynamics._validate import (
    all_positive,
    as_1d_float,
    positive_scalar,
    strictly_increasing,
)
from qualplan.dynamics.errors import InputError
from qualplan.dynamics.units import DB_PER_OCT_UNIT

__all__ = [
    "check_profile",
    "exponents",
    "interp",
    "envelope",
    "slopes_db_per_oct",
    "from_slopes",
    "segment_integrals",
    "exprel",
    "STEP_REL",
]

#: Relative frequency width used to represent a vertical step of an envelope at
#: the band edge of one of its inputs (a breakpoint pair f, f*(1 + STEP_REL)).
STEP_REL = 1e-6


def check_profile(freq, values, field_freq: str = "freq_hz", field_values: str = "values"):
    """Validate a breakpoint profile and return it as two float arrays.

    Parameters
    ----------
    freq : array_like
        Breakpoint frequencies [Hz]; at least 2, finite, > 0, strictly increasing.
    values : array_like
        Breakpoint values [unit of the profile, e.g. g^2/Hz or g]; finite, > 0,
        same length as `freq`.
    field_freq, field_values : str
        Names used in error messages.

    Returns
    -------
    f, v : ndarray
        float64 copies of the inputs.

    Raises
    ------
    InputError
        Naming the field, the offending value and the rule.

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
    f = as_1d_float(field_freq, freq, min_size=2)
    v = as_1d_float(field_values, values, min_size=2)
    if f.shape != v.shape:
        raise InputError(field_values, f"{v.size} values", f"must match {field_freq} ({f.size})")
    all_positive(field_freq, f)
    strictly_increasing(field_freq, f)
    all_positive(field_values, v)
    return f.copy(), v.copy()


def exponents(freq_hz, values) -> np.ndarray:
    """Log-log exponent of every segment.

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz].
    values : array_like
        Breakpoint values [any positive unit].

    Returns
    -------
    ndarray
        ``n_i = ln(v_{i+1}/v_i) / ln(f_{i+1}/f_i)`` [unitless], length ``len(freq_hz) - 1``.

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
    f, v = check_profile(freq_hz, values)
    return _exponents(f, v)


def _exponents(f: np.ndarray, v: np.ndarray) -> np.ndarray:
    return np.diff(np.log(v)) / np.diff(np.log(f))


def interp(freq_hz, values, f):
    """Value of a log-log profile at arbitrary frequencies.

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz].
    values : array_like
        Breakpoint values [unit of the profile].
    f : float or array_like
        Frequencies at which to evaluate [Hz]; any finite values.

    Returns
    -------
    float or ndarray
        Log-log interpolated values [unit of the profile]; 0.0 outside
        ``[freq_hz[0], freq_hz[-1]]`` (and for ``f <= 0``). A scalar for a scalar `f`.

    Notes
    -----
    ``v(f) = v_i (f/f_i)^n_i`` for ``f_i <= f <= f_{i+1}``.

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
    fp, vp = check_profile(freq_hz, values)
    x = np.asarray(f, dtype=float)
    if not np.all(np.isfinite(x)):
        bad = np.ravel(x)[~np.isfinite(np.ravel(x))][0]
        raise InputError("f", float(bad), "must be finite (no NaN or inf)")
    out = _interp(fp, vp, x)
    return float(out) if out.ndim == 0 else out


def _interp(fp: np.ndarray, vp: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Log-log interpolation of validated breakpoints; 0.0 outside the band."""
    x = np.asarray(x, dtype=float)
    out = np.zeros(x.shape)
    inside = (x >= fp[0]) & (x <= fp[-1])
    if inside.any():
        xi = x[inside]
        vals = np.exp(np.interp(np.log(xi), np.log(fp), np.log(vp)))
        # exactly at a breakpoint: the breakpoint value itself (exp(log v) may differ by 1 ulp)
        k = np.minimum(np.searchsorted(fp, xi), fp.size - 1)
        hit = fp[k] == xi
        vals[hit] = vp[k[hit]]
        out[inside] = vals
    return out


def slopes_db_per_oct(freq, values, *, power: bool) -> np.ndarray:
    """Slope of every segment in dB per octave.

    Parameters
    ----------
    freq : array_like
        Breakpoint frequencies [Hz].
    values : array_like
        Breakpoint values.
    power : bool
        True for a power quantity (PSD, 10 log10), False for an amplitude (SRS, g; 20 log10).

    Returns
    -------
    ndarray
        ``s_i = c log10(v_{i+1}/v_i) / log2(f_{i+1}/f_i)`` [dB/oct], c = 10 or 20.
        Equals ``n_i * 3.0103`` (power) or ``n_i * 6.0206`` (amplitude).

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
    f, v = check_profile(freq, values)
    return _exponents(f, v) * (DB_PER_OCT_UNIT if power else 2.0 * DB_PER_OCT_UNIT)


def from_slopes(freq_edges_hz, start_value, slopes_db_oct, *, power: bool):
    """Breakpoints from a start value and a slope per band, as specifications print them.

    Parameters
    ----------
    freq_edges_hz : array_like
        Band edges [Hz], ``k + 1`` strictly increasing values > 0.
    start_value : float
        Value at ``freq_edges_hz[0]`` [unit of the profile].
    slopes_db_oct : array_like
        ``k`` slopes [dB/oct]; 0 for a plateau.
    power : bool
        True for power (PSD: 10 log10), False for amplitude (SRS: 20 log10).

    Returns
    -------
    freq, values : ndarray
        Breakpoints; ``values[i+1] = values[i] * 10^(s_i log2(f_{i+1}/f_i) / c)``, c = 10 or 20.

    Notes
    -----
    A slope taken literally from a print rarely reproduces the printed
    breakpoints exactly (e.g. GEVS 0.026 g^2/Hz at 20 Hz, +6 dB/oct gives
    0.1615 at 50 Hz, not 0.16); store printed breakpoints when you have them.

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
    f = as_1d_float("freq_edges_hz", freq_edges_hz, min_size=2)
    all_positive("freq_edges_hz", f)
    strictly_increasing("freq_edges_hz", f)
    s = as_1d_float("slopes_db_oct", slopes_db_oct, min_size=1)
    if s.size != f.size - 1:
        raise InputError(
            "slopes_db_oct", f"{s.size} slopes", f"needs one per band ({f.size - 1})"
        )
    v0 = positive_scalar("start_value", start_value)
    c = 10.0 if power else 20.0
    steps_db = s * np.log2(f[1:] / f[:-1])
    v = v0 * 10.0 ** (np.concatenate(([0.0], np.cumsum(steps_db))) / c)
    if not np.all(np.isfinite(v)) or np.any(v <= 0):
        raise InputError("slopes_db_oct", s.tolist(), "give values that overflow or underflow")
    return f.copy(), v


def exprel(x: np.ndarray) -> np.ndarray:
    """``(exp(x) - 1) / x``, accurate near and at ``x = 0`` (where it is 1).

    Parameters
    ----------
    x : array_like
        Argument [unitless].

    Returns
    -------
    ndarray
        ``expm1(x)/x``; series ``1 + x/2 + x^2/6`` for ``|x| < 1e-8`` [unitless].

    References
    ----------
    Same function as ``scipy.special.exprel``; written out to keep a single code path.
    """
    x = np.asarray(x, dtype=float)
    out = np.ones_like(x)
    small = np.abs(x) < 1e-8
    big = ~small
    out[big] = np.expm1(x[big]) / x[big]
    xs = x[small]
    out[small] = 1.0 + xs / 2.0 + xs * xs / 6.0
    return out


def segment_integrals(freq_hz, values, k: float = 0.0) -> np.ndarray:
    """Exact integral of ``v(f) f^k`` over every segment of a log-log profile.

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz].
    values : array_like
        Breakpoint values [unit U].
    k : float
        Power of frequency in the integrand (0: area; -2, -4: velocity and
        displacement moments of an acceleration PSD; 2: second moment).

    Returns
    -------
    ndarray
        ``int_{f_i}^{f_{i+1}} v(f) f^k df`` [U Hz^(k+1)] per segment.

    Notes
    -----
    With ``m = n_i + k`` and ``L = ln(f_{i+1}/f_i)``:
    ``I_i = v_i f_i^(k+1) ((f_{i+1}/f_i)^(m+1) - 1)/(m+1) = v_i f_i^(k+1) L exprel((m+1) L)``,
    which is the power-law formula for ``m != -1`` and tends continuously to the
    log form ``v_i f_i^(k+1) L`` at ``m = -1`` (no switch, no division by zero).

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
    f, v = check_profile(freq_hz, values)
    return _segment_integrals(f, v, k)


def _segment_integrals(f: np.ndarray, v: np.ndarray, k: float = 0.0) -> np.ndarray:
    lr = np.diff(np.log(f))
    n = np.diff(np.log(v)) / lr
    return v[:-1] * f[:-1] ** (k + 1.0) * lr * exprel((n + k + 1.0) * lr)


def envelope(profiles: Sequence) -> tuple[np.ndarray, np.ndarray]:
    """Exact maximum envelope of log-log profiles.

    Parameters
    ----------
    profiles : sequence of (freq, values) pairs
        One or more profiles [Hz, unit of the profile]; each validated by
        :func:`check_profile`.

    Returns
    -------
    freq, values : ndarray
        Breakpoints of ``max_j p_j(f)`` over the union of the bands, with new
        breakpoints where log-log segments cross; collinear points removed.

    Raises
    ------
    InputError
        For an empty list, a bad profile, or bands that leave a gap (where the
        envelope would be zero and cannot be drawn in log-log).

    Notes
    -----
    Between consecutive points of the union of all breakpoints and all pairwise
    crossings, no two profiles cross, so the maximum is one straight log-log
    segment: evaluating the maximum at these points is exact everywhere. Where a
    profile starts or ends inside the union band above the others, the envelope
    has a vertical step; it is drawn as a breakpoint pair ``f`` and
    ``f (1 -/+ STEP_REL)`` on the side outside that profile's band, so the
    envelope stays at or above every input at every frequency.

    References
    ----------
    Own method (exact log-log crossings), docs/methods/psd.md "Envelope".
    """
    if profiles is None or len(profiles) == 0:
        raise InputError("profiles", profiles, "needs at least one (freq, values) profile")
    checked = []
    for j, p in enumerate(profiles):
        try:
            fj, vj = p
        except (TypeError, ValueError) as exc:
            raise InputError(
                f"profiles[{j}]", type(p).__name__, "must be a (freq, values) pair"
            ) from exc
        checked.append(check_profile(fj, vj, f"profiles[{j}].freq", f"profiles[{j}].values"))
    if len(checked) == 1:
        return _drop_collinear(*checked[0])

    lf = [np.log(f) for f, _ in checked]
    lv = [np.log(v) for _, v in checked]
    lo = np.array([x[0] for x in lf])
    hi = np.array([x[-1] for x in lf])
    grid = np.unique(np.concatenate(lf))

    # Pairwise crossings on the union grid (each profile is linear on every grid interval).
    vals = np.zeros((len(checked), grid.size))
    active = np.zeros((len(checked), grid.size), dtype=bool)
    for j in range(len(checked)):
        m = (grid >= lo[j]) & (grid <= hi[j])
        active[j] = m
        vals[j, m] = np.interp(grid[m], lf[j], lv[j])
    cross = []
    for a in range(len(checked)):
        for b in range(a + 1, len(checked)):
            both = active[a] & active[b]
            d = np.where(both, vals[a] - vals[b], 0.0)
            ok = both[:-1] & both[1:]
            sc = ok & (d[:-1] * d[1:] < 0)
            if sc.any():
                i = np.nonzero(sc)[0]
                t = d[i] / (d[i] - d[i + 1])
                cross.append(grid[i] + t * (grid[i + 1] - grid[i]))
    x = np.unique(np.concatenate([grid, *cross])) if cross else grid

    # Vertical steps at band edges inside the union band.
    eps = np.log1p(STEP_REL)
    extra = []
    for j in range(len(checked)):
        if lo[j] > grid[0]:
            extra.append(lo[j] - eps)
        if hi[j] < grid[-1]:
            extra.append(hi[j] + eps)
    if extra:
        x = np.unique(np.concatenate([x, np.array(extra)]))
    # Merge points closer than numerical noise (crossings landing on grid points).
    keep = np.concatenate(([True], np.diff(x) > 1e-12))
    x = x[keep]

    env = np.full(x.size, -np.inf)
    for j in range(len(checked)):
        m = (x >= lo[j] - 1e-14) & (x <= hi[j] + 1e-14)
        if m.any():
            env[m] = np.maximum(env[m], np.interp(x[m], lf[j], lv[j]))
    if not np.all(np.isfinite(env)):
        i = int(np.argmax(~np.isfinite(env)))
        raise InputError(
            "profiles", f"no profile covers {np.exp(x[i]):.6g} Hz",
            "bands must overlap or touch (the envelope would be zero in a gap)",
        )
    # A gap can also hide between two grid points: check coverage of each interval midpoint.
    mid = 0.5 * (x[:-1] + x[1:])
    covered = np.zeros(mid.size, dtype=bool)
    for j in range(len(checked)):
        covered |= (mid >= lo[j]) & (mid <= hi[j])
    if not covered.all():
        i = int(np.argmax(~covered))
        raise InputError(
            "profiles", f"no profile covers {np.exp(mid[i]):.6g} Hz",
            "bands must overlap or touch (the envelope would be zero in a gap)",
        )
    fout = np.exp(x)
    # Snap to the input breakpoint frequencies (exp(log(f)) may differ from f by 1 ulp).
    allf = np.unique(np.concatenate([f for f, _ in checked]))
    i = np.clip(np.searchsorted(allf, fout), 1, allf.size - 1)
    near = np.where(np.abs(allf[i - 1] - fout) < np.abs(allf[i] - fout), allf[i - 1], allf[i])
    snap = np.abs(near - fout) <= 1e-12 * fout
    fout[snap] = near[snap]
    return _drop_collinear(fout, np.exp(env))


def _drop_collinear(f: np.ndarray, v: np.ndarray, tol: float = 1e-12):
    """Remove interior breakpoints whose two segments have the same log-log slope.

    Point i is dropped when ``|s_{i-1} - s_i| * min(dx_{i-1}, dx_i) <= tol`` (log
    units), which bounds its distance from the chord of its neighbours by `tol`.
    """
    if f.size <= 2:
        return f, v
    lf, lv = np.log(f), np.log(v)
    dx = np.diff(lf)
    s = np.diff(lv) / dx
    dev = np.abs(np.diff(s)) * np.minimum(dx[:-1], dx[1:])
    keep = np.concatenate(([True], dev > tol, [True]))
    return f[keep], v[keep]


# ---------------------------------------------------------------------------------------------
# Conservative simplification
# ---------------------------------------------------------------------------------------------
#
# Problem: data (x_m, d_m) = (ln f_m, ln v_m), m = 0..M-1. Find breakpoints x_k (a subset of
# the data frequencies, first and last included, K <= N) and values y_k such that the log-log
# line through them is >= d_m at every data frequency, minimising the area int exp(y(x)) df.
# Design (docs/methods/psd.md, "Simplification"):
#   1. dynamic programming over (candidate frequency, candidate level) states; the transition
#      (i, a) -> (j, b) is allowed when the segment is above all data between (its slope is at
#      least the steepest slope from (x_i, y_a) to any data point in (x_i, x_j]); its cost is
#      the exact segment area; one DP layer per segment count, so "at most N points" is exact.
#   2. for the breakpoint frequencies found, the breakpoint values are re-optimised jointly and
#      continuously: a convex program (exponential objective, linear constraints restricted to
#      the upper convex hull of the data in each segment), solved by SLSQP with exact gradients.
#   3. a second DP restricted to windows of data frequencies around each breakpoint, with
#      levels around the optimised profile, followed by step 2 again; kept if better.
#   4. a final lift by the largest residual violation (floating point) so that the profile is
#      >= the data at every data frequency exactly as evaluated by `interp`.

_DB = math.log(10.0) / 10.0  # ln units per dB (power)


def _areas(x0, y0, x1, y1):
    """Exact area of log-log segments (x, y = ln f, ln v), broadcasting."""
    L = x1 - x0
    u = (y1 - y0) + L  # = (n + 1) L
    # unused DP levels are +inf: their areas are +inf (or nan, masked by the caller)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        rel = np.where(np.abs(u) < 1e-8, 1.0 + 0.5 * u, np.expm1(u) / u)
        return np.exp(y0 + x0) * L * rel


def _upper_hull(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Indices of the upper convex hull of points sorted by x (monotone chain)."""
    n = x.size
    if n <= 2:
        return np.arange(n)
    hull: list[int] = []
    for i in range(n):
        while len(hull) >= 2:
            a, b = hull[-2], hull[-1]
            # keep b only if it lies strictly above the chord a -> i
            if (y[b] - y[a]) * (x[i] - x[a]) - (y[i] - y[a]) * (x[b] - x[a]) <= 0:
                hull.pop()
            else:
                break
        hull.append(i)
    return np.array(hull)


def _dp(x, d, cand, levels, n_seg_max):
    """DP over (candidate, level) states; returns (cost, candidate indices, level values).

    cand : sorted indices into the data, first 0, last M-1.
    levels : (K, L) ln values at the candidates (>= data there; inf marks an unused slot).
    """
    K, L = levels.shape
    xc = x[cand]
    # Steepest slope from state (i, a) to any data point in (x_i, x_j], for every j > i.
    smax = np.full((K, L, K), np.inf)
    for i in range(K - 1):
        j_last = K - 1
        seg = slice(cand[i] + 1, cand[j_last] + 1)
        dx = x[seg] - xc[i]
        with np.errstate(invalid="ignore"):
            sl = (d[seg][None, :] - levels[i][:, None]) / dx[None, :]
        run = np.maximum.accumulate(sl, axis=1)
        jj = np.arange(i + 1, j_last + 1)
        smax[i, :, i + 1:j_last + 1] = run[:, cand[jj] - cand[i] - 1]
    area = [None] * K
    for j in range(1, K):
        ii = np.arange(j)
        x0 = xc[ii][:, None, None]
        y0 = levels[ii][:, :, None]
        y1 = levels[j][None, None, :]
        with np.errstate(over="ignore", invalid="ignore"):
            slope = (y1 - y0) / (xc[j] - x0)
            ok = (slope >= smax[ii, :, j][:, :, None] - 1e-12) & np.isfinite(y0) \
                & np.isfinite(y1)
            a = _areas(x0, y0, xc[j], y1)
        area[j] = (ii, np.where(ok, a, np.inf).astype(np.float32))
    best = np.full((n_seg_max + 1, K, L), np.inf, dtype=np.float32)
    arg_i = np.zeros((n_seg_max + 1, K, L), dtype=np.int64)
    arg_a = np.zeros((n_seg_max + 1, K, L), dtype=np.int64)
    best[0, 0, :] = np.where(np.isfinite(levels[0]), 0.0, np.inf)
    for s in range(1, n_seg_max + 1):
        for j in range(1, K):
            if area[j] is None:
                continue
            ii, a = area[j]
            tot = best[s - 1, ii][:, :, None] + a  # (len(ii), L, L)
            flat = tot.reshape(-1, L)
            k = np.argmin(flat, axis=0)
            best[s, j] = flat[k, np.arange(L)]
            arg_i[s, j] = ii[k // L]
            arg_a[s, j] = k % L
    end = best[1:, K - 1, :]
    if not np.isfinite(end).any():
        return np.inf, None, None
    s_best, b = np.unravel_index(np.argmin(end), end.shape)
    s = int(s_best) + 1
    cost = float(end[s_best, b])
    path_j, path_b = [K - 1], [int(b)]
    j = K - 1
    while s > 0:
        i, a = int(arg_i[s, j, path_b[-1]]), int(arg_a[s, j, path_b[-1]])
        path_j.append(i)
        path_b.append(a)
        j = i
        s -= 1
    path_j.reverse()
    path_b.reverse()
    idx = np.array([cand[j] for j in path_j])
    vals = np.array([levels[j, b] for j, b in zip(path_j, path_b, strict=True)])
    return cost, idx, vals


def _dp_windows(x, d, wins: list, levels: list):
    """DP choosing one (frequency, level) state in each window, windows in order.

    wins : list of arrays of data indices (window 0 and the last hold one index each).
    levels : list of (n_w, L) arrays of ln levels (inf = unused).
    Returns (cost, indices, values) or (inf, None, None).
    """
    nw = len(wins)
    best = np.where(np.isfinite(levels[0]), 0.0, np.inf)  # (n_0, L)
    back = []
    for w in range(1, nw):
        ci, cj = wins[w - 1], wins[w]
        yi, yj = levels[w - 1], levels[w]
        # steepest slope from each state of window w-1 to the data up to each candidate of w
        lo = int(ci[0]) + 1
        hi = int(cj[-1]) + 1
        xs, ds = x[lo:hi], d[lo:hi]
        with np.errstate(invalid="ignore", divide="ignore"):
            dx = xs[None, :] - x[ci][:, None]                       # (n_i, m)
            sl = (ds[None, None, :] - yi[:, :, None]) / dx[:, None, :]
        sl = np.where(dx[:, None, :] > 0, sl, -np.inf)               # only points right of i
        run = np.maximum.accumulate(sl, axis=2)
        smax = run[:, :, cj - lo]                                    # (n_i, L, n_j)
        x0 = x[ci][:, None, None, None]
        x1 = x[cj][None, None, :, None]
        y0 = yi[:, :, None, None]
        y1 = yj[None, None, :, :]
        with np.errstate(invalid="ignore", over="ignore"):
            slope = (y1 - y0) / (x1 - x0)
            ok = (slope >= smax[:, :, :, None] - 1e-12) & np.isfinite(y0) & np.isfinite(y1)
            a = _areas(x0, y0, x1, y1)
        tot = np.where(ok, a, np.inf) + best[:, :, None, None]      # (n_i, L, n_j, L)
        flat = tot.reshape(-1, cj.size * yj.shape[1])
        k = np.argmin(flat, axis=0)
        best = flat[k, np.arange(flat.shape[1])].reshape(cj.size, yj.shape[1])
        back.append(k.reshape(cj.size, yj.shape[1]))
    if not np.isfinite(best).any():
        return np.inf, None, None
    j, b = np.unravel_index(np.argmin(best), best.shape)
    cost = float(best[j, b])
    path = [(int(j), int(b))]
    for w in range(nw - 1, 0, -1):
        k = int(back[w - 1][path[-1]])
        path.append(divmod(k, levels[w - 1].shape[1]))
    path.reverse()
    idx = np.array([wins[w][j] for w, (j, _) in enumerate(path)])
    vals = np.array([levels[w][j, b] for w, (j, b) in enumerate(path)])
    return cost, idx, vals


def _exprel2(u: np.ndarray) -> np.ndarray:
    """``int_0^1 t exp(u t) dt = (exp(u)(u - 1) + 1)/u^2``, accurate near u = 0."""
    u = np.asarray(u, dtype=float)
    out = np.empty_like(u)
    small = np.abs(u) < 1e-3
    us = u[small]
    out[small] = 0.5 + us / 3.0 + us * us / 8.0 + us ** 3 / 30.0
    ub = u[~small]
    out[~small] = (np.exp(ub) * (ub - 1.0) + 1.0) / (ub * ub)
    return out


def _segment_hull(x, d, i: int, j: int, cache: dict | None) -> np.ndarray:
    """Data indices of the upper convex hull of the points i..j (cached per (i, j))."""
    if cache is not None and (i, j) in cache:
        return cache[(i, j)]
    m = np.arange(i, j + 1)
    if m.size <= 3:
        h = m
    else:
        from scipy.spatial import ConvexHull, QhullError

        pts = np.column_stack((x[m] - x[i], d[m] - d[m].mean()))
        try:
            vert = ConvexHull(pts).vertices
            # upper chain: vertices on or above the chord between the end points
            chord = pts[0, 1] + (pts[-1, 1] - pts[0, 1]) * pts[vert, 0] / pts[-1, 0]
            up = vert[pts[vert, 1] >= chord - 1e-12]
            h = m[np.unique(np.concatenate(([0, m.size - 1], up)))]
        except QhullError:
            h = m  # degenerate (collinear) points: keep them all
    if cache is not None:
        cache[(i, j)] = h
    return h


def _optimise_values(x, d, idx, y_start, hull_cache: dict | None = None):
    """Continuous optimal breakpoint values for fixed breakpoint indices (convex program)."""
    from scipy.optimize import minimize

    xk = x[idx]
    Lk = np.diff(xk)
    # Linear constraints: for each segment, the upper hull of the data in it.
    hs = [_segment_hull(x, d, int(idx[k]), int(idx[k + 1]), hull_cache)
          for k in range(idx.size - 1)]
    seg = np.concatenate([np.full(h.size, k) for k, h in enumerate(hs)])
    pts = np.concatenate(hs)
    t = (x[pts] - xk[seg]) / Lk[seg]
    A = np.zeros((pts.size, idx.size))
    rows = np.arange(pts.size)
    A[rows, seg] = 1.0 - t
    A[rows, seg + 1] = t
    b = d[pts]
    # Scale the objective to ~1 at the start point.
    scale = float(np.sum(_areas(xk[:-1], y_start[:-1], xk[1:], y_start[1:])))

    # bounds: a breakpoint is at a data line (y_k >= d_k) and never absurdly high (keeps the
    # line search of SLSQP away from overflow)
    top = max(float(d.max()), float(y_start.max())) + 10.0
    bounds = [(float(d[i]), top) for i in idx]
    lo_b = d[idx]

    def fun(y):
        # SLSQP may probe slightly outside the bounds; evaluate at the clipped point
        y = np.clip(y, lo_b, top)
        y0, y1 = y[:-1], y[1:]
        u = y1 - y0 + Lk
        base = np.exp(y0 + xk[:-1]) * Lk
        e1 = exprel(u)
        e2 = _exprel2(u)
        f = float(np.sum(base * e1)) / scale
        g = np.zeros_like(y)
        # dA/dy0 = base * int (1-t) e^{ut} dt = base (e1 - e2); dA/dy1 = base e2
        g[:-1] += base * (e1 - e2)
        g[1:] += base * e2
        return f, g / scale

    # Active-set loop: solve with the constraints that are nearly binding, add any that the
    # solution violates, repeat (SLSQP's cost grows with the number of constraints).
    active = (A @ y_start - b) < 0.25
    y = y_start
    for _ in range(8):
        Aa, ba = A[active], b[active]
        cons = {"type": "ineq", "fun": lambda y, Aa=Aa, ba=ba: Aa @ y - ba,
                "jac": lambda y, Aa=Aa: Aa}
        res = minimize(fun, y_start, jac=True, method="SLSQP", constraints=[cons],
                       bounds=bounds, options={"maxiter": 200, "ftol": 1e-12})
        y = res.x if np.all(np.isfinite(res.x)) else y_start
        slack = A @ y - b
        new = (slack < -1e-10) & ~active
        if not new.any():
            break
        active |= slack < 0.05
    # Repair any tiny violation from the solver tolerance by lifting the worst segments' ends.
    viol = b - A @ y
    if (viol > 0).any():
        y = y + max(0.0, float(viol.max()))
    # Never worse than the start point (which is feasible by construction).
    if fun(y)[0] > fun(y_start)[0] or np.any(b - A @ y > 1e-12):
        y = y_start
    return y


def _local_search(x, d, idx, y, hull_cache: dict | None = None, max_sweeps: int = 60):
    """Move single breakpoints along the data frequencies while the area decreases.

    For breakpoint k between fixed neighbours (k-1, k+1) placed at data index p, the best
    value is the smallest one keeping both segments above the data (the area grows with it):
    y_k(p) = max(y_{k-1} + (x_p - x_{k-1}) max_{m<=p} s_m^-, y_{k+1} + (x_{k+1} - x_p)
    max_{m>=p} s_m^+), with s^- the slopes from (x_{k-1}, y_{k-1}) to the data and s^+ the
    slopes from the data to (x_{k+1}, y_{k+1}) (sign flipped): running maxima, O(M) per k.
    """
    idx = idx.copy()
    y = y.copy()
    nb = idx.size
    for _ in range(max_sweeps):
        moved = False
        for k in range(1, nb - 1):
            a, c = idx[k - 1], idx[k + 1]
            if c - a < 2:
                continue
            p = np.arange(a + 1, c)
            xa, ya, xc_, yc = x[a], y[k - 1], x[c], y[k + 1]
            sl = np.maximum.accumulate((d[p] - ya) / (x[p] - xa))
            sr = np.maximum.accumulate(((d[p] - yc) / (xc_ - x[p]))[::-1])[::-1]
            yk = np.maximum(ya + (x[p] - xa) * sl, yc + (xc_ - x[p]) * sr)
            with np.errstate(over="ignore"):
                cost = _areas(xa, ya, x[p], yk) + _areas(x[p], yk, xc_, yc)
            j = int(np.argmin(cost))
            old = _areas(xa, ya, x[idx[k]], y[k]) + _areas(x[idx[k]], y[k], xc_, yc)
            if cost[j] < old * (1.0 - 1e-12):
                moved = moved or p[j] != idx[k]
                idx[k], y[k] = p[j], yk[j]
        y = _optimise_values(x, d, idx, y, hull_cache)
        if not moved:
            break
    return idx, y


def _min_value_at(x, d, a: int, ya: float, p: int, c: int, yc: float) -> float:
    """Smallest value at data index p keeping the lines (a, ya)-(p, .) and (p, .)-(c, yc) above
    the data between a and c."""
    left = np.arange(a + 1, p + 1)
    right = np.arange(p, c)
    v = d[p]
    if left.size:
        v = max(v, ya + (x[p] - x[a]) * float(np.max((d[left] - ya) / (x[left] - x[a]))))
    if right.size:
        v = max(v, yc + (x[c] - x[p]) * float(np.max((d[right] - yc) / (x[c] - x[right]))))
    return v


def _joint_moves(x, d, idx, y, cache: dict, max_rounds: int = 4):
    """Move one breakpoint by a few data lines and re-optimise all values jointly (SLSQP);
    keep the first improvement, repeat for every breakpoint until a round brings none."""
    idx, y = idx.copy(), y.copy()

    def cost(ii, yy):
        return float(np.sum(_areas(x[ii[:-1]], yy[:-1], x[ii[1:]], yy[1:])))

    best = cost(idx, y)
    for _ in range(max_rounds):
        improved = False
        for k in range(1, idx.size - 1):
            gap = int(min(idx[k] - idx[k - 1], idx[k + 1] - idx[k]))
            big = max(2, gap // 6)
            if idx[k + 1] - idx[k - 1] <= 14:  # few lines between the neighbours: try them all
                steps = [int(q) - int(idx[k]) for q in range(idx[k - 1] + 1, idx[k + 1])
                         if q != idx[k]]
            else:
                steps = [-1, 1, -big, big]
            for step in dict.fromkeys(steps):
                p = int(idx[k]) + step
                if not idx[k - 1] < p < idx[k + 1]:
                    continue
                i2 = idx.copy()
                i2[k] = p
                y2 = y.copy()
                y2[k] = _min_value_at(x, d, int(idx[k - 1]), y[k - 1], p, int(idx[k + 1]),
                                      y[k + 1])
                y2 = _optimise_values(x, d, i2, y2, cache)
                c2 = cost(i2, y2)
                if c2 < best * (1.0 - 1e-9):
                    idx, y, best, improved = i2, y2, c2, True
                    break
        if not improved:
            break
    return idx, y


def _levels_for(d_c: np.ndarray, ceiling: float, n_levels: int) -> np.ndarray:
    """Candidate levels [ln] at each candidate: its data value, then geometric offsets up to
    15 dB above the highest data value (an end point or a tent apex may sit above every data
    point)."""
    span = np.maximum(ceiling - d_c, 0.0) + 15.0 * _DB
    frac = np.concatenate(([0.0], np.geomspace(1e-3, 1.0, n_levels - 1)))
    return d_c[:, None] + span[:, None] * frac[None, :]


def simplify_above(freq, values, max_points: int, *, n_candidates: int = 120,
                   n_levels: int = 28):
    """Conservative log-log simplification (power-like values: the area is minimised).

    Parameters
    ----------
    freq : array_like
        Data frequencies [Hz] (a profile or a measured spectrum's lines).
    values : array_like
        Data values > 0 [U]; the objective is ``int v df`` [U Hz] (for an amplitude
        quantity pass ``v**2`` and take the square root of the result).
    max_points : int
        Largest number of breakpoints of the result (>= 2).
    n_candidates, n_levels : int
        Size of the first DP grid (candidate frequencies and levels per frequency).

    Returns
    -------
    freq, values : ndarray
        At most `max_points` breakpoints at data frequencies, spanning the data band,
        with ``interp(result, f_m) >= v_m`` for every data frequency ``f_m``.

    References
    ----------
    Own method, docs/methods/psd.md "Simplification".
    """
    f, v = check_profile(freq, values, "freq_hz", "values")
    if isinstance(max_points, bool) or not isinstance(max_points, int | np.integer):
        raise InputError("max_points", max_points, "must be an integer >= 2")
    max_points = int(max_points)
    if max_points < 2:
        raise InputError("max_points", max_points, "must be >= 2")
    f0, v0 = _drop_collinear(f, v)
    if f0.size <= max_points:
        return f0, v0
    x, d = np.log(f), np.log(v)
    M = x.size
    n_seg = max_points - 1
    ceiling = float(d.max())

    # ---- pass 1: coarse DP -------------------------------------------------------------
    K = min(M, max(n_candidates, 3 * max_points))
    logspaced = np.unique(np.searchsorted(x, np.linspace(x[0], x[-1], K // 2), side="left"))
    # local maxima (peaks and shoulders) by height, up to K/2 of them
    inner = np.arange(1, M - 1)
    is_peak = inner[(d[inner] >= d[inner - 1]) & (d[inner] >= d[inner + 1])]
    peaks = is_peak[np.argsort(d[is_peak])[::-1][: K - logspaced.size]]
    # upper-hull vertices of the whole data are natural corner candidates
    hull = _upper_hull(x, d)
    cand = np.unique(np.concatenate(([0, M - 1], logspaced, peaks, hull)))
    cand = np.clip(cand, 0, M - 1)
    levels = _levels_for(d[cand], ceiling, n_levels)
    hull_cache: dict = {}
    cost, idx, y = _dp(x, d, cand, levels, n_seg)
    if idx is None:  # cannot happen: a single line through the highest corner is feasible
        raise InputError("values", "no feasible profile", "internal error in simplification")
    y = _optimise_values(x, d, idx, y, hull_cache)
    best_cost = float(np.sum(_areas(x[idx[:-1]], y[:-1], x[idx[1:]], y[1:])))
    best = (idx, y)

    # ---- pass 2: refine around the breakpoints found ------------------------------------
    for _ in range(2):
        idx_b, y_b = best
        nb = idx_b.size
        yfun = np.interp(x, x[idx_b], y_b)
        win_c = []
        for k in range(nb):
            if k == 0 or k == nb - 1:
                c = np.array([idx_b[k]])
            else:
                lo_i = (idx_b[k - 1] + idx_b[k]) // 2 + 1
                hi_i = (idx_b[k] + idx_b[k + 1]) // 2
                c = np.arange(lo_i, hi_i + 1)
                if c.size > 24:
                    near = np.argsort(np.abs(c - idx_b[k]))[:16]
                    rest = np.linspace(0, c.size - 1, 8).astype(int)
                    c = np.unique(np.concatenate((c[near], c[rest])))
            win_c.append(c)
        offs2 = np.linspace(-1.5, 1.5, 21) * _DB
        lev_w = []
        for c in win_c:
            lv = yfun[c][:, None] + offs2[None, :]
            lv = np.where(lv > d[c][:, None], lv, np.inf)
            lev_w.append(np.column_stack((d[c], lv)))
        c2, idx2, y2 = _dp_windows(x, d, win_c, lev_w)
        if idx2 is None:
            break
        y2 = _optimise_values(x, d, idx2, y2, hull_cache)
        c2 = float(np.sum(_areas(x[idx2[:-1]], y2[:-1], x[idx2[1:]], y2[1:])))
        if c2 < best_cost * (1 - 1e-9):
            best_cost, best = c2, (idx2, y2)
        else:
            break

    idx, y = _local_search(x, d, *best, hull_cache)
    idx, y = _joint_moves(x, d, idx, y, hull_cache, max_rounds=4 if n_seg <= 16 else 2)
    fo, vo = f[idx].copy(), np.exp(y)
    # ---- final guarantee at every data frequency, as `interp` evaluates it -------------------
    for _ in range(5):
        ratio = float(np.max(v / _interp(fo, vo, f)))
        if ratio <= 1.0:
            break
        vo = vo * ratio * (1.0 + 4e-16)
    return _drop_collinear(fo, vo)
