"""SDOF responses to a piecewise-cubic base acceleration, with peaks between samples.

The ramp-invariant filters of :mod:`qualplan.dynamics.sdof_filter` read the
samples as a piecewise-linear signal. That model is exact for a signal that is
linear between samples but attenuates smooth (band-limited) content by about
sinc^2(f/fs), and a peak taken at the samples only reads low by up to
``1 - cos(pi fn/fs)``. This module offers the two remedies used by the
``method="cubic"`` and ``method="bandlimited"`` spectra (docs/methods/srs.md):

- an input model that is a cubic between samples (Hermite form: the sample
  values and one slope per sample end of each interval), solved *exactly* by a
  cubic-hold discretisation of the oscillator (the block matrix exponential of
  the oscillator augmented by a chain of four integrators: the
  triangle-hold construction of Franklin, Powell & Workman carried to degree
  3). With the slopes of each interval equal to its secant the model is the
  piecewise-linear one, and the recursion agrees with Smallwood's
  ramp-invariant filter to rounding;
- the response and its exact time derivative at every sample, from which a
  cubic Hermite interpolant of the response between two samples gives the
  peak between them (interpolation error below ``(wn dt)^4 / 384`` of the
  amplitude: 0.65 % at fs = 5 fn, 0.1 % at fs = 8 fn, Hermite remainder
  bound, Burden & Faires, Numerical Analysis, sec. 3.4).

Slopes: :func:`limited_slopes` gives fourth-order central differences limited
as in Fritsch & Carlson (1980) so the interpolant never overshoots the samples
where they are monotone and is flat at a sampled extremum (no ringing after a
step). Normalised time tau = t/dt is used throughout.
"""

from __future__ import annotations

import numpy as np
from scipy import linalg

try:
    import numba

    _HAVE_NUMBA = True
except ImportError:  # pragma: no cover
    numba = None
    _HAVE_NUMBA = False

__all__ = ["cubic_hold_coefficients", "limited_slopes", "secant_slopes", "run_peaks"]

#: Response kinds of the kernel: absolute acceleration (g) or z / dt^2 (g).
ABS_ACCEL, REL_DISP = 0, 1


def cubic_hold_coefficients(fn: np.ndarray, q: float, dt: float) -> np.ndarray:
    """Exact one-step map of a base-excited SDOF driven by a cubic input.

    Parameters
    ----------
    fn : numpy.ndarray
        Natural frequencies [Hz], below 1/(2 dt).
    q : float
        Amplification Q = 1/(2 zeta) [unitless].
    dt : float
        Sample step [s].

    Returns
    -------
    numpy.ndarray
        Shape (n_fn, 14): per oscillator ``phi00, phi01, phi10, phi11`` (state
        transition), ``a0_0, a0_1, a1_0, a1_1`` (weights of the interval's end
        values x0, x1), ``b0_0, b0_1, b1_0, b1_1`` (weights of its end slopes
        m0, m1, per unit tau), then ``w = wn dt`` and ``zeta``. The state is
        ``s = (z / dt^2, z' / dt)`` with z the relative displacement in g s^2,
        so that ``s' = A s - (0, x)`` in tau with ``A = [[0, 1], [-w^2, -2 zeta w]]``
        and x the base acceleration [g].

    Notes
    -----
    Over one step the input is ``u(tau) = x0 + m0 tau + c2 tau^2 + c3 tau^3``
    (Hermite form); the oscillator augmented by the chain ``u -> u' -> u'' ->
    u'''`` is linear and time-invariant, so ``expm`` of the 6x6 block matrix
    gives the exact map from ``(s, u, u', u'', u''')`` at tau = 0 to s at
    tau = 1 (Van Loan 1978, "Computing integrals involving the matrix
    exponential", IEEE TAC 23; Franklin, Powell & Workman, Digital Control of
    Dynamic Systems, 3rd ed., 1998, triangle hold). All entries are O(1) in
    normalised time, so the result is accurate to rounding for wn dt << 1.
    """
    zeta = 1.0 / (2.0 * q)
    w = 2.0 * np.pi * np.asarray(fn, float) * dt
    n = w.size
    m = np.zeros((n, 6, 6))
    m[:, 0, 1] = 1.0
    m[:, 1, 0] = -w * w
    m[:, 1, 1] = -2.0 * zeta * w
    m[:, 1, 2] = -1.0
    m[:, 2, 3] = 1.0
    m[:, 3, 4] = 1.0
    m[:, 4, 5] = 1.0
    e = linalg.expm(m)
    phi = e[:, :2, :2]
    g = e[:, :2, 2:6]  # weights of u, u', u'', u''' at tau = 0
    g0, g1, g2, g3 = g[:, :, 0], g[:, :, 1], g[:, :, 2], g[:, :, 3]
    # Hermite: u''(0) = 6 (x1 - x0) - 4 m0 - 2 m1, u'''(0) = 12 (x0 - x1) + 6 (m0 + m1)
    a0 = g0 - 6.0 * g2 + 12.0 * g3
    a1 = 6.0 * g2 - 12.0 * g3
    b0 = g1 - 4.0 * g2 + 6.0 * g3
    b1 = -2.0 * g2 + 6.0 * g3
    out = np.empty((n, 14))
    out[:, 0:4] = phi.reshape(n, 4)
    out[:, 4:6] = a0
    out[:, 6:8] = a1
    out[:, 8:10] = b0
    out[:, 10:12] = b1
    out[:, 12] = w
    out[:, 13] = zeta
    return out


def secant_slopes(xp: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Interval slopes of the piecewise-linear model (both ends = the secant).

    Parameters
    ----------
    xp : numpy.ndarray
        Samples [g].

    Returns
    -------
    m0, m1 : numpy.ndarray
        Slope at the start and at the end of each of the ``xp.size - 1``
        intervals, per unit tau [g].
    """
    d = np.diff(xp)
    return d, d.copy()


def limited_slopes(xp: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Slopes of a monotone-limited piecewise-cubic interpolant of the samples.

    Parameters
    ----------
    xp : numpy.ndarray
        Samples [g]; zero is assumed before the first and after the last.

    Returns
    -------
    m0, m1 : numpy.ndarray
        Slope at the start and at the end of each of the ``xp.size - 1``
        intervals, per unit tau [g]. Away from a kink the same slope serves
        both intervals that meet at a sample (the interpolant is C1); at a
        kink (below) each side has its own.

    Notes
    -----
    Fourth-order central difference ``(x[k-2] - 8 x[k-1] + 8 x[k+1] - x[k+2]) / 12``
    (exact for quartics), then the limiter of Fritsch & Carlson (1980): zero
    at a sampled extremum (secants of opposite sign or zero), otherwise of the
    sign of the secants and at most three times the smaller of them, which
    keeps the interpolant monotone where the samples are. Where the samples are
    linear the slope is the secant and the model is piecewise linear.

    Kinks: a sample where an exactly linear stretch of the samples (three or
    more collinear samples: the zero padding, a pre-trigger baseline, the
    ramp of a sawtooth) meets samples that are not on its line is a corner of
    the signal, not a smooth point. No difference stencil crosses a kink: each
    side of a kink gets its own one-sided slope (the derivative of the
    polynomial through up to five samples of that side, limited to the sign
    of that side's secant and three times it), and the samples within two of
    a kink use the samples between the kinks only. A half-sine pulse after
    zeros therefore starts with its true slope instead of a slope bent by the
    zeros (+0.9 % at fs/5 for 20 samples before, docs/methods/between-samples.md),
    and a piecewise-linear pulse is reproduced exactly. Records without exact
    linear stretches get the slopes above unchanged.

    References
    ----------
    F. N. Fritsch, R. E. Carlson, "Monotone piecewise cubic interpolation",
    SIAM J. Numer. Anal. 17 (2), 1980, pp. 238-246. One-sided finite-difference
    weights: B. Fornberg, "Generation of finite difference formulas on
    arbitrarily spaced grids", Math. Comp. 51, 1988 (here by Lagrange
    differentiation on integer nodes). The kink rule is our own.
    """
    xp = np.ascontiguousarray(xp, dtype=float)
    if _HAVE_NUMBA:  # one pass, no temporaries (the numpy form below is 5x slower)
        m = np.empty(xp.size)
        _limited_slopes_into(xp, m)
    else:
        x = np.concatenate([[0.0, 0.0], xp, [0.0, 0.0]])
        m = (x[:-4] - 8.0 * x[1:-3] + 8.0 * x[3:-1] - x[4:]) / 12.0
        d = np.diff(x)[1:-1]  # secants around each sample: d[k] = xp[k] - xp[k-1]
        dl, dr = d[:-1], d[1:]
        same = dl * dr > 0.0
        lim = 3.0 * np.minimum(np.abs(dl), np.abs(dr))
        sgn = np.sign(dl)
        mag = np.where(np.sign(m) == sgn, np.abs(m), 0.0)
        m = np.where(same, sgn * np.minimum(mag, lim), 0.0)
    m0, m1 = m[:-1].copy(), m[1:].copy()
    kinks = _kinks(xp)
    if kinks.size:
        _fix_kinks(xp, kinks, m0, m1, _ONE_SIDED)
    return m0, m1


def _kinks(xp: np.ndarray) -> np.ndarray:
    """Indices (-1 .. n, zero padding beyond) of the kinks of the samples.

    Sample k is on a linear stretch when its second difference is zero (to
    1e-12 of the largest |sample|); it is a kink when it is not, but a
    neighbour is.
    """
    n = xp.size
    x = np.concatenate([[0.0, 0.0, 0.0], xp, [0.0, 0.0, 0.0]])  # x[j] = sample j - 3
    scale = float(np.max(np.abs(xp))) if n else 0.0
    if scale == 0.0:
        return np.empty(0, dtype=np.int64)
    lin = np.abs(x[2:] - 2.0 * x[1:-1] + x[:-2]) <= 1e-12 * scale  # samples -2 .. n + 1
    kink = ~lin[1:-1] & (lin[:-2] | lin[2:])  # samples -1 .. n
    return (np.flatnonzero(kink) - 1).astype(np.int64)


def _one_sided_weights() -> np.ndarray:
    """w[a + 4, b, :] : derivative at 0 of the polynomial through nodes a..b (a <= 0 <= b,
    1 <= b - a <= 4), weights of the samples at a, a+1, ..., b (Lagrange differentiation)."""
    w = np.zeros((5, 5, 5))
    for a in range(-4, 1):
        for b in range(0, 5):
            if not 1 <= b - a <= 4:
                continue
            nodes = np.arange(a, b + 1, dtype=float)
            for i, oi in enumerate(nodes):
                tot = 0.0
                for j, oj in enumerate(nodes):
                    if j == i:
                        continue
                    prod = 1.0 / (oi - oj)
                    for m, om in enumerate(nodes):
                        if m not in (i, j):
                            prod *= (0.0 - om) / (oi - om)
                    tot += prod
                w[a + 4, b, i] = tot
    return w


_ONE_SIDED = _one_sided_weights()


def _stencil_py(xp, k, a, b, wt):  # pragma: no cover - compiled when numba is present
    """Derivative at sample k of the polynomial through samples k+a .. k+b (0 beyond)."""
    n = xp.shape[0]
    s = 0.0
    for i in range(b - a + 1):
        j = k + a + i
        if 0 <= j < n:
            s += wt[a + 4, b, i] * xp[j]
    return s


def _side_limit_py(s, sec):  # pragma: no cover - compiled when numba is present
    """One-sided limiter at a kink: the sign of the side's secant, at most 3x it."""
    if sec == 0.0 or s * sec <= 0.0:
        return 0.0
    if abs(s) > 3.0 * abs(sec):
        return 3.0 * sec
    return s


def _fix_kinks_py(xp, kinks, m0, m1, wt):  # pragma: no cover - compiled when numba is present
    """Slopes at and within two samples of each kink (see :func:`limited_slopes`)."""
    n = xp.shape[0]
    nk = kinks.shape[0]
    for ik in range(nk):
        c = kinks[ik]
        for k in range(max(c - 2, 0), min(c + 3, n)):
            lo = k - 4  # nearest kink strictly left of k, if within 4 samples
            hi = k + 4  # nearest kink strictly right of k, if within 4 samples
            is_kink = False
            for jk in range(max(ik - 5, 0), min(ik + 6, nk)):
                q = kinks[jk]
                if lo < q < k:
                    lo = q
                elif k < q < hi:
                    hi = q
                elif q == k:
                    is_kink = True
            dl = xp[k] - (xp[k - 1] if k >= 1 else 0.0)
            dr = (xp[k + 1] if k + 1 < n else 0.0) - xp[k]
            if is_kink:
                if k >= 1:
                    m1[k - 1] = _side_limit(_stencil(xp, k, lo - k, 0, wt), dl)
                if k < n - 1:
                    m0[k] = _side_limit(_stencil(xp, k, 0, hi - k, wt), dr)
                continue
            s = _stencil(xp, k, max(lo - k, -2), min(hi - k, 2), wt)
            if dl * dr > 0.0:  # Fritsch & Carlson, as in the one-pass kernel
                lim = 3.0 * min(abs(dl), abs(dr))
                sgn = 1.0 if dl > 0.0 else -1.0
                mag = abs(s) if s * sgn > 0.0 else 0.0
                s = sgn * min(mag, lim)
            else:
                s = 0.0
            if k >= 1:
                m1[k - 1] = s
            if k < n - 1:
                m0[k] = s


if _HAVE_NUMBA:
    _stencil = numba.njit(cache=True, inline="always")(_stencil_py)
    _side_limit = numba.njit(cache=True, inline="always")(_side_limit_py)
    _fix_kinks = numba.njit(cache=True)(_fix_kinks_py)
else:  # pragma: no cover
    _stencil, _side_limit, _fix_kinks = _stencil_py, _side_limit_py, _fix_kinks_py


if _HAVE_NUMBA:

    @numba.njit(cache=True, fastmath=False)
    def _limited_slopes_into(xp, m):  # pragma: no cover - compiled
        """:func:`limited_slopes` in one pass: the slope at every sample into m."""
        n = xp.shape[0]
        for k in range(n):
            xm2 = xp[k - 2] if k >= 2 else 0.0
            xm1 = xp[k - 1] if k >= 1 else 0.0
            xp1 = xp[k + 1] if k + 1 < n else 0.0
            xp2 = xp[k + 2] if k + 2 < n else 0.0
            c = (xm2 - 8.0 * xm1 + 8.0 * xp1 - xp2) / 12.0
            dl = xp[k] - xm1
            dr = xp1 - xp[k]
            if dl * dr > 0.0:
                lim = 3.0 * min(abs(dl), abs(dr))
                sgn = 1.0 if dl > 0.0 else -1.0
                mag = abs(c) if c * sgn > 0.0 else 0.0
                m[k] = sgn * min(mag, lim)
            else:
                m[k] = 0.0

    @numba.njit(cache=True, fastmath=False)
    def _hermite_extremum(r0, r1, d0, d1):  # pragma: no cover - compiled
        """Value at the interior extremum of the cubic with end values and slopes."""
        c2 = 3.0 * (r1 - r0) - 2.0 * d0 - d1
        c3 = 2.0 * (r0 - r1) + d0 + d1
        t = -1.0
        if abs(c3) <= 1e-12 * (abs(c2) + abs(d0) + abs(d1)):
            if c2 != 0.0:
                t = -d0 / (2.0 * c2)
        else:
            disc = c2 * c2 - 3.0 * c3 * d0
            if disc < 0.0:
                disc = 0.0
            sq = np.sqrt(disc)
            qq = -(c2 + sq) if c2 >= 0.0 else -(c2 - sq)
            t1 = qq / (3.0 * c3)
            if 0.0 <= t1 <= 1.0:
                t = t1
            elif qq != 0.0:
                t = d0 / qq
        if t < 0.0:
            t = 0.0
        elif t > 1.0:
            t = 1.0
        return r0 + t * (d0 + t * (c2 + t * c3))

    @numba.njit(cache=True, inline="always")
    def _step4(k, xp, m0, m1, c, s0, s1, r, d, hi, lo, between, n_int):  # pragma: no cover
        """One interval for four oscillators; extremes folded into hi/lo."""
        if k < n_int:
            xa = xp[k]
            xb = xp[k + 1]
            ma = m0[k]
            mb = m1[k]
        else:
            xa = 0.0
            xb = 0.0
            ma = 0.0
            mb = 0.0
        for j in range(4):
            n0 = c[0, j] * s0[j] + c[1, j] * s1[j] + c[4, j] * xa + c[6, j] * xb \
                + c[8, j] * ma + c[10, j] * mb
            n1 = c[2, j] * s0[j] + c[3, j] * s1[j] + c[5, j] * xa + c[7, j] * xb \
                + c[9, j] * ma + c[11, j] * mb
            s0[j] = n0
            s1[j] = n1
            rn = c[14, j] * n0 + c[15, j] * n1
            dn = c[16, j] * n0 + c[17, j] * n1 + c[18, j] * xb
            if rn > hi[j]:
                hi[j] = rn
            if rn < lo[j]:
                lo[j] = rn
            if between and d[j] * dn < 0.0:
                # cheap bound first: the Hermite cubic exceeds the chord by at
                # most 4/27 (|d0 - s| + |d1 - s|)
                sl = rn - r[j]
                bound = (4.0 / 27.0) * (abs(d[j] - sl) + abs(dn - sl))
                if max(r[j], rn) + bound > hi[j] or min(r[j], rn) - bound < lo[j]:
                    pk = _hermite_extremum(r[j], rn, d[j], dn)
                    if pk > hi[j]:
                        hi[j] = pk
                    if pk < lo[j]:
                        lo[j] = pk
            r[j] = rn
            d[j] = dn

    @numba.njit(parallel=True, cache=True, fastmath=False)
    def _peaks_bank(xp, m0, m1, cf, kind, n_end, n_extra, between, out):  # pragma: no cover
        """Four oscillators per pass (independent recursions keep the floating-point
        units busy, as the ramp kernel of sdof_filter); no branch on the phase."""
        n_fn = cf.shape[0]
        n_int = xp.shape[0] - 1
        n_groups = (n_fn + 3) // 4
        for g in numba.prange(n_groups):
            i0 = g * 4
            m = min(4, n_fn - i0)
            c = np.zeros((19, 4))
            ext = 0
            for j in range(m):
                i = i0 + j
                for t in range(12):
                    c[t, j] = cf[i, t]
                w, zeta = cf[i, 12], cf[i, 13]
                c1 = 2.0 * zeta * w
                c0 = w * w
                if kind == 0:  # absolute acceleration and its tau-derivative
                    c[14, j] = -c0
                    c[15, j] = -c1
                    c[16, j] = c1 * c0
                    c[17, j] = c1 * c1 - c0
                    c[18, j] = c1
                else:  # z / dt^2 and its tau-derivative
                    c[14, j] = 1.0
                    c[17, j] = 1.0
                ext = max(ext, n_extra[i])
            s0 = np.zeros(4)
            s1 = np.zeros(4)
            r = np.zeros(4)
            d = np.zeros(4)
            hp = np.zeros(4)
            lp = np.zeros(4)
            for k in range(n_end - 1):  # values at samples 1 .. n_end - 1: during
                _step4(k, xp, m0, m1, c, s0, s1, r, d, hp, lp, between, n_int)
            hr = np.full(4, -np.inf)
            lr = np.full(4, np.inf)
            # interval ending at the last sample of the record: during and after
            _step4(n_end - 1, xp, m0, m1, c, s0, s1, r, d, hp, lp, between, n_int)
            for j in range(4):
                hr[j] = r[j]
                lr[j] = r[j]
            for k in range(n_end, n_int + ext):
                _step4(k, xp, m0, m1, c, s0, s1, r, d, hr, lr, between, n_int)
            for j in range(m):
                out[i0 + j, 0] = hp[j]
                out[i0 + j, 1] = lp[j]
                out[i0 + j, 2] = hr[j]
                out[i0 + j, 3] = lr[j]


def run_peaks(xp, m0, m1, cf, *, kind: int, n_end: int, n_extra, between: bool = True):
    """Extremes of each oscillator during a record and in free decay after it.

    Parameters
    ----------
    xp : numpy.ndarray
        Input samples [g]; ``xp[0]`` is the at-rest instant (normally 0 g).
    m0, m1 : numpy.ndarray
        Start and end slope of each interval, per unit tau [g]; size
        ``xp.size - 1``.
    cf : numpy.ndarray
        Coefficients from :func:`cubic_hold_coefficients`, shape (n_fn, 14).
    kind : int
        :data:`ABS_ACCEL` (absolute acceleration [g]) or :data:`REL_DISP`
        (``z / dt^2`` [g], scale by ``dt^2`` for g s^2).
    n_end : int
        Index in ``xp`` of the last sample of the record: extremes up to it are
        "during", from it on "after" [samples].
    n_extra : array_like of int
        Intervals of zero input run after the end of ``xp``, per oscillator.
    between : bool
        Also take the peaks between samples (cubic Hermite of the response).

    Returns
    -------
    numpy.ndarray
        Shape (n_fn, 4): max and min during, max and min after [unit of kind].
    """
    xp = np.ascontiguousarray(xp, dtype=float)
    n_extra = np.ascontiguousarray(np.broadcast_to(n_extra, (cf.shape[0],)), dtype=np.int64)
    out = np.empty((cf.shape[0], 4))
    if not _HAVE_NUMBA:  # pragma: no cover
        raise RuntimeError("the cubic-hold SDOF kernel needs numba")
    _peaks_bank(xp, np.ascontiguousarray(m0, dtype=float), np.ascontiguousarray(m1, dtype=float),
                np.ascontiguousarray(cf), int(kind), int(n_end), n_extra, bool(between), out)
    return out
