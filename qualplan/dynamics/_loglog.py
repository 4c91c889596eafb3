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

from collections.abc import Sequence

import numpy as np

from qualplan.dynamics._validate import all_positive, as_1d_float, strictly_increasing
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
        lx = np.log(x[inside])
        out[inside] = np.exp(np.interp(lx, np.log(fp), np.log(vp)))
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
    """
    f = as_1d_float("freq_edges_hz", freq_edges_hz, min_size=2)
    all_positive("freq_edges_hz", f)
    strictly_increasing("freq_edges_hz", f)
    s = as_1d_float("slopes_db_oct", slopes_db_oct, min_size=1)
    if s.size != f.size - 1:
        raise InputError(
            "slopes_db_oct", f"{s.size} slopes", f"needs one per band ({f.size - 1})"
        )
    try:
        v0 = float(start_value)
    except (TypeError, ValueError) as exc:
        raise InputError("start_value", start_value, "must be a number") from exc
    if not np.isfinite(v0) or v0 <= 0:
        raise InputError("start_value", start_value, "must be a finite number > 0")
    c = 10.0 if power else 20.0
    steps_db = s * np.log2(f[1:] / f[:-1])
    v = v0 * 10.0 ** (np.concatenate(([0.0], np.cumsum(steps_db))) / c)
    if not np.all(np.isfinite(v)) or np.any(v <= 0):
        raise InputError("slopes_db_oct", s.tolist(), "give values that overflow or underflow")
    return f.copy(), v


def exprel(x: np.ndarray) -> np.ndarray:
    """``(exp(x) - 1) / x``, accurate near and at ``x = 0`` (where it is 1)."""
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
