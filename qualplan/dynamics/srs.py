"""Shock response spectra (SRS) of acceleration time histories, and SRS profiles.

The SRS of a record is the peak response of a family of base-excited
single-degree-of-freedom oscillators (natural frequency fn, amplification Q)
to that record. The responses come from the ramp-invariant recursive filters
of :mod:`qualplan.dynamics.sdof_filter` (Smallwood 1981; ISO 18431-4); only
their extremes are kept, so memory is O(n_fn) whatever the record length.

Kinds of spectrum (all returned as positive magnitudes):

- ``maximax``: max |response| over the record and the residual free decay;
- ``positive``: max of the response (same time span);
- ``negative``: |min| of the response (same time span);
- ``primary``: max |response| during the record as given;
- ``residual``: max |response| from the last sample of the record (the
  instant the input ends) through the free decay after it.

Residual free decay: after the last sample the input returns linearly to zero
over one step and the oscillator of natural frequency fn is run on for one
damped natural period ``1/(fn sqrt(1 - zeta^2))`` (plus two samples). The
extrema of a free damped oscillation are half a damped period apart and
decrease, so the residual peak always lies inside that window; the longest
extension (that of the lowest fn) is reported as ``residual_extension_s``.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from qualplan.dynamics import _validate, sdof_filter
from qualplan.dynamics.errors import AccuracyWarning, InputError

KINDS = ("maximax", "positive", "negative", "primary", "residual")

#: Relative tolerance on the steps of a time vector for it to count as uniform.
UNIFORM_STEP_RTOL = 1e-3

__all__ = [
    "KINDS",
    "SrsResult",
    "octave_grid",
    "pseudo_velocity_srs",
    "sample_step",
    "shock_response_spectrum",
    "srs",
]


# --------------------------------------------------------------------------
# Natural-frequency grids


def octave_grid(f_lo_hz, f_hi_hz, n_per_octave, *, anchor_hz: float = 1000.0) -> np.ndarray:
    """Natural-frequency grid in 1/N-octave steps (base-2, anchored at 1 kHz).

    Parameters
    ----------
    f_lo_hz : float
        Lowest frequency wanted [Hz]; the first grid point is the smallest
        grid frequency >= f_lo_hz (to a relative 1e-9).
    f_hi_hz : float
        Highest frequency wanted [Hz]; the last grid point is the largest
        grid frequency <= f_hi_hz (to a relative 1e-9).
    n_per_octave : int
        Points per octave N (e.g. 3, 6, 12, 24) [1/oct].
    anchor_hz : float, optional
        Reference frequency that lies on the grid [Hz]. Default 1000 Hz, as
        the exact mid-band frequencies of IEC 61260-1 / ANSI S1.11 base-2
        fractional-octave bands. Pass ``anchor_hz=f_lo_hz`` for a grid that
        starts exactly at f_lo_hz.

    Returns
    -------
    numpy.ndarray
        Grid frequencies ``anchor_hz * 2**(k/N)`` within [f_lo_hz, f_hi_hz] [Hz].

    Notes
    -----
    Base-2 ratio: consecutive points differ by exactly 2^(1/N)
    (1/6 octave: 1.12246; 1/12 octave: 1.05946). These are the exact
    frequencies, not the rounded nominal labels (e.g. 1/3-octave 125.99 Hz is
    labelled "125 Hz").

    References
    ----------
    IEC 61260-1:2014, Electroacoustics - Octave-band and fractional-octave-band
    filters, sec. 5.2-5.4 (base-two exact mid-band frequencies, reference 1 kHz).
    ANSI S1.11-2004 (same definitions).
    """
    lo = _validate.positive_scalar("f_lo_hz", f_lo_hz)
    hi = _validate.positive_scalar("f_hi_hz", f_hi_hz)
    if hi < lo:
        raise InputError("f_hi_hz", f_hi_hz, f"must be >= f_lo_hz = {lo:g}")
    try:
        n = int(n_per_octave)
    except (TypeError, ValueError) as exc:
        raise InputError("n_per_octave", n_per_octave, "must be an integer >= 1") from exc
    if n < 1 or n != n_per_octave:
        raise InputError("n_per_octave", n_per_octave, "must be an integer >= 1")
    ref = _validate.positive_scalar("anchor_hz", anchor_hz)
    k_lo = math.ceil(n * math.log2(lo / ref) - 1e-9 * n)
    k_hi = math.floor(n * math.log2(hi / ref) + 1e-9 * n)
    if k_hi < k_lo:
        raise InputError(
            "f_hi_hz", f_hi_hz, f"no 1/{n}-octave grid point between {lo:g} and {hi:g} Hz"
        )
    return ref * 2.0 ** (np.arange(k_lo, k_hi + 1) / n)


# --------------------------------------------------------------------------
# SRS of a time history


def sample_step(time_s) -> float:
    """Sample step of a uniformly sampled time vector.

    Parameters
    ----------
    time_s : array_like
        Sample times, strictly increasing [s].

    Returns
    -------
    float
        Mean step ``(t[-1] - t[0]) / (n - 1)`` [s].

    Raises
    ------
    InputError
        If a step differs from the mean step by more than
        ``UNIFORM_STEP_RTOL`` (0.1 %) of it (a gap or jitter): the recursive
        filters need uniform sampling.

    References
    ----------
    ISO 18431-4:2007 (the digital filter method assumes uniform sampling).
    """
    t = _validate.as_1d_float("time_s", time_s, min_size=2)
    _validate.strictly_increasing("time_s", t)
    d = np.diff(t)
    dt = (t[-1] - t[0]) / (t.size - 1)
    dev = np.abs(d - dt)
    if (dev > UNIFORM_STEP_RTOL * dt).any():
        i = int(np.argmax(dev))
        raise InputError(
            f"time_s[{i + 1}]", float(t[i + 1]),
            f"sampling must be uniform: step {d[i]:.6g} s differs from the mean step "
            f"{dt:.6g} s by more than {UNIFORM_STEP_RTOL:.1%}",
        )
    return float(dt)


def _step(dt_s, n_samples: int) -> float:
    if np.ndim(dt_s) == 0:
        return _validate.positive_scalar("dt_s", dt_s)
    t = np.asarray(dt_s, dtype=float)
    if t.size != n_samples:
        raise InputError(
            "dt_s", f"{t.size} time values",
            f"must be a scalar step or one time per sample ({n_samples})",
        )
    return sample_step(t)


@dataclass(frozen=True)
class SrsResult:
    """Shock response spectra of one record, all kinds.

    Attributes
    ----------
    fn_hz : numpy.ndarray
        Natural frequencies [Hz].
    q : float
        Amplification Q [unitless].
    maximax_g, positive_g, negative_g, primary_g, residual_g : numpy.ndarray
        Absolute-acceleration SRS of each kind, positive magnitudes [g].
    pseudo_vel_m_s : numpy.ndarray or None
        Maximax pseudo-velocity SRS ``wn max|z|`` [m/s], None if not asked.
    dt_s : float
        Sample step [s].
    duration_s : float
        Record span ``(n - 1) dt`` from first to last sample [s].
    residual_extension_s : float
        Longest free-decay extension after the record (lowest fn) [s].
    warnings : tuple of str
        Accuracy warnings, not failures: natural frequencies above fs/10; a
        record that ends while the input is still active (|last sample| above
        5 % of the peak: probably truncated); a record shorter than one period
        of the lowest fn (affects the primary spectrum only).
    """

    fn_hz: np.ndarray
    q: float
    maximax_g: np.ndarray
    positive_g: np.ndarray
    negative_g: np.ndarray
    primary_g: np.ndarray
    residual_g: np.ndarray
    pseudo_vel_m_s: np.ndarray | None
    dt_s: float
    duration_s: float
    residual_extension_s: float
    warnings: tuple[str, ...]

    def kind(self, kind: str) -> np.ndarray:
        """Spectrum of one kind [g]; `kind` among :data:`KINDS`."""
        return getattr(self, f"{_check_kind(kind)}_g")


def _check_kind(kind: str) -> str:
    if kind not in KINDS:
        raise InputError("kind", kind, f"must be one of {', '.join(KINDS)}")
    return kind


def _residual_samples(fn: np.ndarray, q: float, dt: float) -> np.ndarray:
    zeta = 1.0 / (2.0 * q)
    period = 1.0 / (fn * math.sqrt(1.0 - zeta * zeta))
    return np.ceil(period / dt).astype(np.int64) + 2


#: The record counts as truncated when |last sample| exceeds this share of its peak.
TRUNCATION_SHARE = 0.05


def _accuracy_warnings(x: np.ndarray, fn: np.ndarray, dt: float) -> tuple[str, ...]:
    out = []
    fs = 1.0 / dt
    duration = (x.size - 1) * dt
    high = fn > 0.1 * fs
    if high.any():
        worst = 1.0 - math.cos(math.pi * float(fn[high].max()) / fs)
        out.append(
            f"{int(high.sum())} natural frequencies ({fn[high].min():g} to {fn[high].max():g} Hz)"
            f" exceed a tenth of the sample rate ({0.1 * fs:g} Hz): peaks between samples may"
            f" be missed, the SRS there may read up to {worst:.1%} low; resample the record"
            f" to at least 10 x fn"
        )
    peak = float(np.abs(x).max())
    if peak > 0 and abs(x[-1]) > TRUNCATION_SHARE * peak:
        out.append(
            f"the record ends while the input is still active (last sample {x[-1]:g} g ="
            f" {abs(x[-1]) / peak:.0%} of the peak {peak:g} g): it may be truncated; the residual"
            f" spectrum assumes the input drops to zero within one sample after the end"
        )
    if duration * fn.min() < 1.0:
        out.append(
            f"primary spectrum: the record ({duration:g} s) is shorter than one period of the"
            f" lowest natural frequency ({fn.min():g} Hz); below {1.0 / duration:g} Hz the"
            f" primary SRS covers less than one response cycle (the maximax and residual"
            f" spectra are complete: the free decay after the record is included)"
        )
    return tuple(out)


def shock_response_spectrum(
    accel_g, dt_s, freq_hz, q=10.0, *, pseudo_velocity: bool = True
) -> SrsResult:
    """SRS of an acceleration time history, every kind, with accuracy warnings.

    Parameters
    ----------
    accel_g : array_like
        Base acceleration, uniformly sampled, 1-D, at least 2 samples [g].
        The oscillators start at rest; the input is linear between samples.
    dt_s : float or array_like
        Sample step [s], or the sample times (one per sample; must be uniform
        within 0.1 %) [s].
    freq_hz : array_like
        Natural frequencies [Hz], each > 0 and below the Nyquist frequency
        (see :func:`octave_grid`).
    q : float, optional
        Amplification Q = 1/(2 zeta) [unitless], > 0.5. Default 10.
    pseudo_velocity : bool, optional
        Also compute the maximax pseudo-velocity SRS (doubles the work).

    Returns
    -------
    SrsResult
        Spectra of all kinds [g], pseudo-velocity [m/s], residual extension
        [s] and accuracy warnings.

    Notes
    -----
    Absolute acceleration of the mass ``x'' = -(2 zeta wn z' + wn^2 z)`` from
    Smallwood's ramp-invariant filter::

        y_k = (1 - S') x_k + 2 (S' - C) x_(k-1) + (E^2 - S') x_(k-2)
              + 2 C y_(k-1) - E^2 y_(k-2)

    ``E = exp(-zeta wn dt)``, ``K = wd dt``, ``C = E cos K``, ``S' = E sin K / K``.
    Pseudo-velocity ``PV = wn max|z|`` from the ramp-invariant relative
    displacement filter. Peaks are the sampled extremes (no interpolation):
    the error is below ``1 - cos(pi fn / fs)`` (4.9 % at fs = 10 fn).

    References
    ----------
    D. O. Smallwood, "An improved recursive formula for calculating shock
    response spectra", Shock and Vibration Bulletin 51 (2), 1981.
    ISO 18431-4:2007, Mechanical vibration and shock - Signal processing -
    Part 4: Shock-response spectrum analysis.
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), ch. 8.
    """
    x = _validate.as_1d_float("accel_g", accel_g, min_size=2)
    dt = _step(dt_s, x.size)
    fn, qv, dt = sdof_filter.check_inputs(freq_hz, q, dt)
    n_extra = _residual_samples(fn, qv, dt)
    b, a = sdof_filter.coefficients(fn, qv, dt, output="abs_accel")
    ext = sdof_filter.run_extremes(x, b, a, n_extra)
    hi_p, lo_p, hi_r, lo_r = ext.T
    primary = np.maximum(hi_p, -lo_p)
    residual = np.maximum(hi_r, -lo_r)
    positive = np.maximum(np.maximum(hi_p, hi_r), 0.0)
    negative = np.maximum(np.maximum(-lo_p, -lo_r), 0.0)
    pv = None
    if pseudo_velocity:
        bz, az = sdof_filter.coefficients(fn, qv, dt, output="pseudo_vel")
        e = sdof_filter.run_extremes(x, bz, az, n_extra)
        pv = np.max(np.abs(e), axis=1)
    duration = (x.size - 1) * dt
    return SrsResult(
        fn_hz=fn,
        q=qv,
        maximax_g=np.maximum(primary, residual),
        positive_g=positive,
        negative_g=negative,
        primary_g=primary,
        residual_g=residual,
        pseudo_vel_m_s=pv,
        dt_s=dt,
        duration_s=duration,
        residual_extension_s=float(n_extra.max() * dt),
        warnings=_accuracy_warnings(x, fn, dt),
    )


def srs(accel_g, dt_s, freq_hz, q=10.0, kind="maximax") -> np.ndarray:
    """Absolute-acceleration shock response spectrum of a time history.

    Parameters
    ----------
    accel_g : array_like
        Base acceleration, uniformly sampled, 1-D, at least 2 samples [g].
    dt_s : float or array_like
        Sample step [s], or the uniform sample times [s].
    freq_hz : array_like
        Natural frequencies [Hz], below the Nyquist frequency.
    q : float, optional
        Amplification Q = 1/(2 zeta) [unitless], > 0.5. Default 10.
    kind : {"maximax", "positive", "negative", "primary", "residual"}
        Which spectrum (see the module docstring); all are positive
        magnitudes.

    Returns
    -------
    numpy.ndarray
        SRS at each natural frequency [g].

    Warns
    -----
    AccuracyWarning
        When a natural frequency exceeds a tenth of the sample rate, when the
        record ends while the input is still active (probably truncated), and
        for ``kind="primary"`` when the record is shorter than one period of
        the lowest natural frequency.

    Notes
    -----
    Thin wrapper of :func:`shock_response_spectrum` (same method: Smallwood's
    ramp-invariant filter, residual by free decay for one damped period).

    References
    ----------
    D. O. Smallwood, "An improved recursive formula for calculating shock
    response spectra", Shock and Vibration Bulletin 51 (2), 1981.
    ISO 18431-4:2007, Mechanical vibration and shock - Signal processing -
    Part 4: Shock-response spectrum analysis.
    """
    _check_kind(kind)
    res = shock_response_spectrum(accel_g, dt_s, freq_hz, q, pseudo_velocity=False)
    for text in res.warnings:
        if kind != "primary" and text.startswith("primary spectrum"):
            continue
        warnings.warn(text, AccuracyWarning, stacklevel=2)
    return res.kind(kind)


def pseudo_velocity_srs(accel_g, dt_s, freq_hz, q=10.0) -> np.ndarray:
    """Maximax pseudo-velocity shock response spectrum ``wn max|z|``.

    Parameters
    ----------
    accel_g : array_like
        Base acceleration, uniformly sampled, 1-D [g].
    dt_s : float or array_like
        Sample step [s], or the uniform sample times [s].
    freq_hz : array_like
        Natural frequencies [Hz], below the Nyquist frequency.
    q : float, optional
        Amplification Q [unitless], > 0.5. Default 10.

    Returns
    -------
    numpy.ndarray
        Pseudo-velocity at each natural frequency, over the record and its
        residual free decay [m/s].

    Warns
    -----
    AccuracyWarning
        As :func:`srs`.

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (2010), ch. 8 (pseudo-velocity);
    D. O. Smallwood 1981 (ramp-invariant filters); ISO 18431-4:2007.
    """
    x = _validate.as_1d_float("accel_g", accel_g, min_size=2)
    dt = _step(dt_s, x.size)
    fn, qv, dt = sdof_filter.check_inputs(freq_hz, q, dt)
    for text in _accuracy_warnings(x, fn, dt):
        if not text.startswith("primary spectrum"):
            warnings.warn(text, AccuracyWarning, stacklevel=2)
    b, a = sdof_filter.coefficients(fn, qv, dt, output="pseudo_vel")
    e = sdof_filter.run_extremes(x, b, a, _residual_samples(fn, qv, dt))
    return np.max(np.abs(e), axis=1)
