"""Shock response spectra (SRS) of acceleration time histories, and SRS profiles.

Functions by topic
------------------
- SRS of a record: :func:`srs` (the public entry point),
  :func:`shock_response_spectrum` (all kinds, warnings), :func:`pseudo_velocity_srs`
- natural-frequency grids: :func:`octave_grid`
- specifications: :class:`SrsProfile` (breakpoints, log-log), :func:`srs_envelope`
  (exact), :func:`srs_tolerance_limits` (P95/50), :func:`tolerance_band`
- judging a measured SRS: :func:`check_srs` -> :class:`SrsCheck`

See docs/methods/srs.md.

The SRS of a record is the peak response of a family of base-excited
single-degree-of-freedom oscillators (natural frequency fn, amplification Q)
to that record. The responses come from the ramp-invariant recursive filters
of :mod:`qualplan.dynamics.sdof_filter` (Smallwood 1981; ISO 18431-4); only
their extremes are kept, so memory is O(n_fn) whatever the record length.
``method="cubic"`` / ``"bandlimited"`` use the cubic-hold oscillator of
:mod:`qualplan.dynamics.sdof_hold` with peaks between samples instead;
``"auto"`` takes the cubic hold for a record with a step or kink and otherwise
the band-limited reconstruction read by the pre-emphasised ramp-invariant
filter with parabolic-vertex peaks (:func:`record_model`;
docs/methods/between-samples.md); the default ``"ramp"`` is unchanged.

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

from qualplan.dynamics import _loglog, _validate, sdof_filter, sdof_hold
from qualplan.dynamics import stats as _stats
from qualplan.dynamics.errors import AccuracyWarning, InputError

KINDS = ("maximax", "positive", "negative", "primary", "residual")

#: Input models of the SRS (docs/methods/srs.md): "ramp" reads the samples as a
#: piecewise-linear signal and takes the peaks at the samples (ISO 18431-4 as
#: published); "cubic" reads them as a monotone-limited piecewise cubic, solved
#: exactly, with peaks between samples; "bandlimited" reconstructs the record by
#: FFT interpolation where fn > fs/20 and then works as "cubic".
#: "auto" chooses per record: "cubic" when the record has a step or a kink (the
#: detectors of :func:`record_model`), otherwise the band-limited reconstruction
#: read by the pre-emphasised ramp-invariant filter with parabolic-vertex peaks
#: (docs/methods/between-samples.md, "The auto method").
METHODS = ("ramp", "cubic", "bandlimited", "auto")

#: Below this many samples per natural period the "bandlimited" method upsamples.
BANDLIMITED_MIN_RATIO = 20.0

#: Zero samples padded on each side of a record before FFT interpolation.
FFT_PAD = 256

#: Relative tolerance on the steps of a time vector for it to count as uniform.
UNIFORM_STEP_RTOL = 1e-3

__all__ = [
    "KINDS",
    "METHODS",
    "SrsCheck",
    "SrsLimits",
    "SrsProfile",
    "SrsResult",
    "check_srs",
    "srs_envelope",
    "srs_tolerance_limits",
    "tolerance_band",
    "octave_grid",
    "pseudo_velocity_srs",
    "record_model",
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


def _accuracy_warnings(x: np.ndarray, fn: np.ndarray, dt: float,
                       method: str = "ramp") -> tuple[str, ...]:
    out = []
    fs = 1.0 / dt
    duration = (x.size - 1) * dt
    high = fn > 0.1 * fs
    if method != "ramp":
        out.extend(_method_warnings(method, x, fn, fs))
    elif high.any():
        worst = 1.0 - math.cos(math.pi * float(fn[high].max()) / fs)
        out.append(
            f"{int(high.sum())} natural frequencies ({fn[high].min():g} to {fn[high].max():g} Hz)"
            f" exceed a tenth of the sample rate ({0.1 * fs:g} Hz): peaks between samples may"
            f" be missed, the SRS there may read up to {worst:.1%} low; resample the record"
            f" to at least 10 x fn"
        )
    peak = max(float(x.max()), -float(x.min()))  # max |x| without a copy of the record
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


def _check_method(method: str) -> str:
    if method not in METHODS:
        raise InputError("method", method, f"must be one of {', '.join(METHODS)}")
    return method


def fft_upsample(x: np.ndarray, factor: int, pad: int = FFT_PAD) -> np.ndarray:
    """Band-limited (trigonometric) interpolation of a zero-padded record.

    Parameters
    ----------
    x : numpy.ndarray
        Samples [any unit].
    factor : int
        Upsampling factor L >= 1 [unitless].
    pad : int
        Zeros added before and after the record so that the periodic
        extension of the FFT does not join its end to its start [samples].

    Returns
    -------
    numpy.ndarray
        ``L m`` samples at step dt/L, m >= n + 2 pad the next fast FFT length;
        sample j of the record is at index ``(pad + j) L`` [unit of x].

    References
    ----------
    Whittaker-Shannon interpolation by zero-padding the DFT (Oppenheim &
    Schafer, Discrete-Time Signal Processing, 3rd ed., 2010, sec. 4.6); the
    Nyquist bin of an even length is split between +/- fs/2.
    """
    from scipy import fft as _fft

    # at least `pad` zeros after the record, more up to a fast FFT length
    n = _fft.next_fast_len(x.size + 2 * pad, real=True)
    xp = np.concatenate([np.zeros(pad), x, np.zeros(n - x.size - pad)])
    if factor == 1:
        return xp
    spec = _fft.rfft(xp, workers=-1)
    if n % 2 == 0:
        spec[-1] *= 0.5
    up = np.zeros(factor * n // 2 + 1, dtype=complex)
    up[: spec.size] = spec
    return _fft.irfft(up, factor * n, workers=-1) * factor


def _upsampling_factors(fn: np.ndarray, dt: float) -> dict[int, np.ndarray]:
    """Power-of-two factor L giving at least BANDLIMITED_MIN_RATIO samples per natural
    period, and the indices of the natural frequencies that need it."""
    need = BANDLIMITED_MIN_RATIO * fn * dt
    lf = np.where(need <= 1.0, 1, 2 ** np.ceil(np.log2(np.maximum(need, 1.0))))
    return {int(v): np.flatnonzero(lf == v) for v in np.unique(lf)}


def _smooth_extremes(x, fn, q, dt, output: str) -> np.ndarray:
    """Extremes for a smooth record ("auto"): FFT reconstruction at L fs where fs < 20 fn,
    the 3-tap pre-emphasis that undoes the first-order hold's sinc^2 (residual below
    1e-4 at 20 samples per period), Smallwood's ramp-invariant filter and the parabolic
    vertex at every local extremum of the response (sdof_filter.run_vertex_extremes)."""
    groups = _upsampling_factors(fn, dt)
    top = max(groups)
    x_top = fft_upsample(x, top) if top > 1 else None
    out = np.empty((fn.size, 4))
    for factor, idx in groups.items():
        h = dt / factor
        if factor == 1:
            xs, n_end = x, x.size
        else:  # every (top/L)-th sample of the L_max trigonometric interpolation
            xs = x_top[:: top // factor]
            n_end = FFT_PAD * factor + (x.size - 1) * factor + 1
        xs = sdof_filter.sinc2_preemphasis(xs)
        b, a = sdof_filter.coefficients(fn[idx], q, h, output=output)
        out[idx] = sdof_filter.run_vertex_extremes(xs, b, a, n_end,
                                                   _residual_samples(fn[idx], q, h))
    return out


def _record_extremes(x, fn, q, dt, output: str, method: str, n_extra) -> np.ndarray:
    """(n_fn, 4) extremes during / after the record, as sdof_filter.run_extremes."""
    if method == "auto":
        if record_model(x) == "cubic":
            method = "cubic"
        else:
            return _smooth_extremes(x, fn, q, dt, output)
    if method == "ramp":
        b, a = sdof_filter.coefficients(fn, q, dt, output=output)
        return sdof_filter.run_extremes(x, b, a, n_extra)
    kind = sdof_hold.ABS_ACCEL if output == "abs_accel" else sdof_hold.REL_DISP
    out = np.empty((fn.size, 4))
    if method == "cubic":
        groups = {1: np.arange(fn.size)}
    else:
        groups = _upsampling_factors(fn, dt)
    top = max(groups)
    x_top = fft_upsample(x, top) if method == "bandlimited" and top > 1 else None
    for factor, idx in groups.items():
        h = dt / factor
        if method == "cubic" or factor == 1:
            xs, start = x, 0
        else:  # trigonometric interpolation: every (top/L)-th sample of the L_max one
            xs, start = x_top[:: top // factor], FFT_PAD * factor
        xp = np.concatenate([[0.0], xs, [0.0]])
        m0, m1 = sdof_hold.limited_slopes(xp)
        cf = sdof_hold.cubic_hold_coefficients(fn[idx], q, h)
        n_end = start + (x.size - 1) * (factor if start else 1) + 1
        n_after = _residual_samples(fn[idx], q, h) - 1
        e = sdof_hold.run_peaks(xp, m0, m1, cf, kind=kind, n_end=n_end, n_extra=n_after)
        if kind == sdof_hold.REL_DISP:
            e = e * (h * h * sdof_filter.G0_M_S2)
            if output == "pseudo_vel":
                e = e * (2.0 * np.pi * fn[idx])[:, None]
        out[idx] = e
    return out


def shock_response_spectrum(
    accel_g, dt_s, freq_hz, q=10.0, *, pseudo_velocity: bool = True, method: str = "ramp"
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
        Also compute the maximax pseudo-velocity SRS [unitless flag] (doubles
        the work).
    method : {"ramp", "cubic", "bandlimited", "auto"}, optional
        Input model and peak search [unitless], see :data:`METHODS` and
        docs/methods/srs.md. Default "ramp" (piecewise-linear input, peaks at
        the samples: ISO 18431-4 as published).

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
    method = _check_method(method)
    x = _validate.as_1d_float("accel_g", accel_g, min_size=2)
    dt = _step(dt_s, x.size)
    fn, qv, dt = sdof_filter.check_inputs(freq_hz, q, dt)
    n_extra = _residual_samples(fn, qv, dt)
    ext = _record_extremes(x, fn, qv, dt, "abs_accel", method, n_extra)
    hi_p, lo_p, hi_r, lo_r = ext.T
    primary = np.maximum(hi_p, -lo_p)
    residual = np.maximum(hi_r, -lo_r)
    positive = np.maximum(np.maximum(hi_p, hi_r), 0.0)
    negative = np.maximum(np.maximum(-lo_p, -lo_r), 0.0)
    pv = None
    if pseudo_velocity:
        e = _record_extremes(x, fn, qv, dt, "pseudo_vel", method, n_extra)
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
        warnings=_accuracy_warnings(x, fn, dt, method),
    )


def srs(accel_g, dt_s, freq_hz, q=10.0, kind="maximax", *, method: str = "ramp") -> np.ndarray:
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
        Which spectrum [unitless] (see the module docstring); all are
        positive magnitudes.
    method : {"ramp", "cubic", "bandlimited", "auto"}, optional
        Input model and peak search [unitless] (:func:`shock_response_spectrum`).
        Default "ramp".

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
    res = shock_response_spectrum(accel_g, dt_s, freq_hz, q, pseudo_velocity=False,
                                  method=method)
    for text in res.warnings:
        if kind != "primary" and text.startswith("primary spectrum"):
            continue
        warnings.warn(text, AccuracyWarning, stacklevel=2)
    return res.kind(kind)


def pseudo_velocity_srs(accel_g, dt_s, freq_hz, q=10.0, *, method: str = "ramp") -> np.ndarray:
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
    method : {"ramp", "cubic", "bandlimited", "auto"}, optional
        Input model and peak search [unitless] (:func:`shock_response_spectrum`).
        Default "ramp".

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
    method = _check_method(method)
    x = _validate.as_1d_float("accel_g", accel_g, min_size=2)
    dt = _step(dt_s, x.size)
    fn, qv, dt = sdof_filter.check_inputs(freq_hz, q, dt)
    for text in _accuracy_warnings(x, fn, dt, method):
        if not text.startswith("primary spectrum"):
            warnings.warn(text, AccuracyWarning, stacklevel=2)
    e = _record_extremes(x, fn, qv, dt, "pseudo_vel", method, _residual_samples(fn, qv, dt))
    return np.max(np.abs(e), axis=1)


# --------------------------------------------------------------------------
# SRS profiles (breakpoints in g, log-log), envelopes, statistics, tolerances


@dataclass(frozen=True, eq=False)
class SrsProfile:
    """An SRS specification given by breakpoints (immutable, validated).

    Attributes
    ----------
    freq_hz : numpy.ndarray
        Breakpoint natural frequencies [Hz], strictly increasing, > 0
        (read-only array).
    accel_g : numpy.ndarray
        SRS values [g], > 0 (read-only array); log-log interpolation between
        breakpoints, 0 g outside the band.
    q : float
        Amplification Q the spectrum refers to [unitless]. Default 10.
    """

    freq_hz: np.ndarray
    accel_g: np.ndarray
    q: float = 10.0

    def __post_init__(self) -> None:
        f, a = _loglog.check_profile(self.freq_hz, self.accel_g, "freq_hz", "accel_g")
        f.flags.writeable = False
        a.flags.writeable = False
        object.__setattr__(self, "freq_hz", f)
        object.__setattr__(self, "accel_g", a)
        object.__setattr__(self, "q", _validate.check_q(self.q))

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, SrsProfile):
            return NotImplemented
        return bool(np.array_equal(self.freq_hz, other.freq_hz)
                    and np.array_equal(self.accel_g, other.accel_g) and self.q == other.q)

    def __hash__(self) -> int:
        return hash((self.freq_hz.tobytes(), self.accel_g.tobytes(), self.q))

    def value_at(self, f):
        """SRS at `f` [Hz] by log-log interpolation -> [g]; 0 outside the band."""
        return _loglog.interp(self.freq_hz, self.accel_g, f)

    def slopes_db_per_oct(self) -> np.ndarray:
        """Segment slopes, 20 log10 per octave [dB/oct] (6.0206 dB/oct per unit exponent)."""
        return _loglog.slopes_db_per_oct(self.freq_hz, self.accel_g, power=False)

    def scaled_db(self, db: float) -> SrsProfile:
        """Copy scaled by `db` [dB on amplitude: x 10^(db/20)]."""
        try:
            d = float(db)
        except (TypeError, ValueError) as exc:
            raise InputError("db", db, "must be a number") from exc
        if not np.isfinite(d):
            raise InputError("db", db, "must be finite")
        return SrsProfile(self.freq_hz, self.accel_g * 10.0 ** (d / 20.0), self.q)

    @classmethod
    def from_slopes(cls, freq_edges_hz, start_accel_g: float, slopes_db_oct,
                    q: float = 10.0) -> SrsProfile:
        """Profile from a start value and one slope per band, as specs print them.

        Parameters
        ----------
        freq_edges_hz : array_like
            Band edges [Hz].
        start_accel_g : float
            SRS at the first edge [g].
        slopes_db_oct : array_like
            One slope per band, 20 log10 per octave [dB/oct]; 0 for a plateau.
        q : float, optional
            Amplification Q [unitless].

        Returns
        -------
        SrsProfile
            ``a_(i+1) = a_i 10^(s_i log2(f_(i+1)/f_i) / 20)`` [g].

        References
        ----------
        Log-log straight lines, amplitude dB, 20 log10 (common practice).
        """
        f, v = _loglog.from_slopes(freq_edges_hz, start_accel_g, slopes_db_oct, power=False)
        return cls(f, v, q)


def _as_pair(p, j):
    if isinstance(p, SrsProfile):
        return p.freq_hz, p.accel_g
    try:
        f, a = p
    except (TypeError, ValueError) as exc:
        raise InputError(f"profiles[{j}]", type(p).__name__,
                         "must be an SrsProfile or a (freq_hz, accel_g) pair") from exc
    return f, a


def srs_envelope(profiles) -> SrsProfile:
    """Exact maximum envelope of several SRS profiles.

    Parameters
    ----------
    profiles : sequence of SrsProfile or (freq_hz, accel_g)
        Profiles to envelope [Hz, g]; SrsProfile entries must share one Q.

    Returns
    -------
    SrsProfile
        Breakpoints of ``max_j SRS_j(f)`` with new breakpoints where log-log
        segments cross [g]; Q of the inputs (10 when only pairs are given).

    Notes
    -----
    Same exact envelope as for PSDs (the geometry of log-log straight lines
    does not depend on the dB convention): see ``_loglog.envelope``.

    References
    ----------
    NASA-HDBK-7005 (2001), envelope of spectra (common practice).
    """
    if isinstance(profiles, SrsProfile):
        profiles = [profiles]
    if profiles is None or len(profiles) == 0:
        raise InputError("profiles", profiles, "needs at least one SRS profile")
    qs = {p.q for p in profiles if isinstance(p, SrsProfile)}
    if len(qs) > 1:
        raise InputError("profiles", sorted(qs), "must all refer to the same Q")
    f, v = _loglog.envelope([_as_pair(p, j) for j, p in enumerate(profiles)])
    return SrsProfile(f, v, qs.pop() if qs else 10.0)


@dataclass(frozen=True, eq=False)
class SrsLimits:
    """Statistics of several measured SRS on one natural-frequency grid.

    Attributes
    ----------
    freq_hz : numpy.ndarray
        Natural frequencies [Hz].
    p50_g : numpy.ndarray
        Log-normal median 10^mean(log10 SRS) [g].
    upper_g : numpy.ndarray
        Normal tolerance limit on log10 values (P95/50 by default) [g].
    maximum_g : numpy.ndarray
        Plain maximum of the spectra [g].
    std_db : numpy.ndarray
        Sample standard deviation of 20 log10 SRS [dB].
    k_factor : float
        One-sided tolerance factor used [unitless].
    n : int
        Number of spectra.
    coverage, confidence : float
        beta and gamma of the limit [unitless].
    """

    freq_hz: np.ndarray
    p50_g: np.ndarray
    upper_g: np.ndarray
    maximum_g: np.ndarray
    std_db: np.ndarray
    k_factor: float
    n: int
    coverage: float
    confidence: float


def srs_tolerance_limits(freq_hz, srs_g, *, coverage: float = 0.95,
                         confidence: float = 0.50) -> SrsLimits:
    """P95/50 (or any P beta/gamma) limit of several measured SRS.

    Parameters
    ----------
    freq_hz : array_like
        Common natural-frequency grid [Hz], strictly increasing.
    srs_g : array_like, shape (n_spectra, n_freq)
        Measured SRS, all > 0 [g]; n_spectra >= 2.
    coverage : float, optional
        Proportion beta below the limit [unitless]. Default 0.95.
    confidence : float, optional
        Confidence gamma [unitless]. Default 0.50.

    Returns
    -------
    SrsLimits
        P50, upper limit, maximum [g], spread [dB], k, n.

    Notes
    -----
    Log-normal model: ``upper = 10^(ybar + k s)`` with ``y = log10(SRS)``
    per frequency, ``k`` the exact one-sided normal tolerance factor
    (non-central t). Shared with the PSD statistics (:mod:`stats`).

    References
    ----------
    NASA-HDBK-7005 (2001), Dynamic Environmental Criteria; NASA-STD-7003A
    (2011), maximum expected environment as P95/50; Owen 1963 (SCR-607).
    """
    f = _validate.as_1d_float("freq_hz", freq_hz)
    _validate.all_positive("freq_hz", f)
    _validate.strictly_increasing("freq_hz", f)
    x = np.asarray(srs_g, dtype=float)
    if x.ndim != 2 or x.shape[1] != f.size:
        raise InputError("srs_g", f"shape {x.shape}", f"must be (n_spectra, {f.size})")
    lim = _stats.log_tolerance_limits(x, coverage=coverage, confidence=confidence)
    return SrsLimits(
        freq_hz=f,
        p50_g=lim.mean_p50,
        upper_g=lim.upper,
        maximum_g=lim.maximum,
        std_db=20.0 * lim.std_log10,
        k_factor=lim.k_factor,
        n=lim.n,
        coverage=lim.coverage,
        confidence=lim.confidence,
    )


def _nominal_values(nominal_profile, f: np.ndarray) -> np.ndarray:
    if isinstance(nominal_profile, SrsProfile):
        pf, pa = nominal_profile.freq_hz, nominal_profile.accel_g
    else:
        try:
            pf, pa = nominal_profile
        except (TypeError, ValueError) as exc:
            raise InputError("nominal_profile", type(nominal_profile).__name__,
                             "must be an SrsProfile or (freq_hz, accel_g)") from exc
        pf, pa = _loglog.check_profile(pf, pa, "nominal_profile.freq_hz",
                                       "nominal_profile.accel_g")
    out = (f < pf[0] * (1 - 1e-12)) | (f > pf[-1] * (1 + 1e-12))
    if out.any():
        i = int(np.argmax(out))
        raise InputError(
            f"freq_hz[{i}]", float(f[i]),
            f"lies outside the specified band {pf[0]:g} to {pf[-1]:g} Hz: check only inside it",
        )
    return _loglog.interp(pf, pa, np.clip(f, pf[0], pf[-1]))


def tolerance_band(nominal_profile, freq_hz, *, lower_db: float, upper_db: float):
    """Lower and upper tolerance limits around a nominal SRS.

    Parameters
    ----------
    nominal_profile : SrsProfile or (freq_hz, accel_g)
        Specified SRS [Hz, g].
    freq_hz : array_like
        Natural frequencies inside the specified band [Hz].
    lower_db : float
        Lower limit relative to nominal, <= 0 (e.g. -3) [dB].
    upper_db : float
        Upper limit relative to nominal, >= 0 (e.g. +6) [dB].

    Returns
    -------
    lower_g, nominal_g, upper_g : numpy.ndarray
        ``nominal x 10^(lower_db/20)``, nominal, ``nominal x 10^(upper_db/20)`` [g].

    References
    ----------
    Amplitude dB, 20 log10 (common practice); tolerance bands as in
    MIL-STD-810H Method 516.8 / 517.3 and NASA-STD-7003A (from memory).
    """
    f = _validate.as_1d_float("freq_hz", freq_hz)
    lo, hi = _band("lower_db", lower_db, "upper_db", upper_db)
    nom = _nominal_values(nominal_profile, f)
    return nom * 10.0 ** (lo / 20.0), nom, nom * 10.0 ** (hi / 20.0)


def _band(lname, lower, uname, upper) -> tuple[float, float]:
    try:
        lo, hi = float(lower), float(upper)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{lname}/{uname}", (lower, upper), "must be numbers") from exc
    if not np.isfinite(lo) or lo > 0:
        raise InputError(lname, lower, "must be a finite number <= 0 dB (e.g. -3)")
    if not np.isfinite(hi) or hi < 0:
        raise InputError(uname, upper, "must be a finite number >= 0 dB (e.g. +6)")
    return lo, hi


@dataclass(frozen=True, eq=False)
class SrsCheck:
    """Verdict of a measured SRS against a specified one with its tolerances.

    Attributes
    ----------
    freq_hz : numpy.ndarray
        Natural frequencies checked [Hz].
    measured_g, nominal_g : numpy.ndarray
        Measured and specified SRS [g].
    deviation_db : numpy.ndarray
        ``20 log10(measured / nominal)`` [dB].
    lower_db, upper_db : float
        Tolerance band [dB].
    within_band : numpy.ndarray of bool
        Per frequency: ``lower_db <= deviation_db <= upper_db``.
    passed_per_freq : numpy.ndarray of bool
        Per frequency verdict: within the band, or (when an outer band is
        given) within the outer band.
    share_within_band : float
        Fraction of points within the band [unitless].
    fraction_at_or_above_nominal : float
        Fraction of points with ``measured >= nominal`` [unitless].
    worst_freq_hz : float
        Frequency of the worst point [Hz]: the one with the least margin to
        the band edges (most negative when outside).
    worst_deviation_db : float
        Its deviation from nominal [dB].
    worst_margin_db : float
        Its margin to the nearer band edge, negative when outside [dB].
    passed : bool
        Overall verdict (every rule below holds).
    reasons : tuple of str
        Why it failed (empty when passed).
    outer_lower_db, outer_upper_db : float or None
        Outer band, when the rule allows a share of points outside the band.
    min_share_within_band : float
        Required share within the band (1.0: every point) [unitless].
    min_fraction_above : float or None
        Required fraction at or above nominal [unitless], None if no rule.
    """

    freq_hz: np.ndarray
    measured_g: np.ndarray
    nominal_g: np.ndarray
    deviation_db: np.ndarray
    lower_db: float
    upper_db: float
    within_band: np.ndarray
    passed_per_freq: np.ndarray
    share_within_band: float
    fraction_at_or_above_nominal: float
    worst_freq_hz: float
    worst_deviation_db: float
    worst_margin_db: float
    passed: bool
    reasons: tuple[str, ...]
    outer_lower_db: float | None
    outer_upper_db: float | None
    min_share_within_band: float
    min_fraction_above: float | None

    @property
    def reason(self) -> str:
        """One sentence: why it failed, or a summary of the pass."""
        if self.reasons:
            return "; ".join(self.reasons)
        return (
            f"within {self.lower_db:+g}/{self.upper_db:+g} dB at"
            f" {self.share_within_band:.0%} of {self.freq_hz.size} points; worst"
            f" {self.worst_deviation_db:+.2f} dB at {self.worst_freq_hz:g} Hz;"
            f" {self.fraction_at_or_above_nominal:.0%} at or above nominal"
        )

    def as_dict(self) -> dict:
        """Plain JSON-ready dict (lists and floats) with unit-suffixed keys."""
        return {
            "passed": bool(self.passed),
            "reason": self.reason,
            "reasons": list(self.reasons),
            "lower_db": self.lower_db,
            "upper_db": self.upper_db,
            "outer_lower_db": self.outer_lower_db,
            "outer_upper_db": self.outer_upper_db,
            "min_share_within_band": self.min_share_within_band,
            "min_fraction_above": self.min_fraction_above,
            "share_within_band": self.share_within_band,
            "fraction_at_or_above_nominal": self.fraction_at_or_above_nominal,
            "worst": {
                "freq_hz": self.worst_freq_hz,
                "deviation_db": self.worst_deviation_db,
                "margin_db": self.worst_margin_db,
            },
            "freq_hz": self.freq_hz.tolist(),
            "measured_g": self.measured_g.tolist(),
            "nominal_g": self.nominal_g.tolist(),
            "deviation_db": self.deviation_db.tolist(),
            "passed_per_freq": self.passed_per_freq.tolist(),
        }


def check_srs(
    freq_hz,
    measured_g,
    nominal_profile,
    *,
    lower_db: float,
    upper_db: float,
    outer_lower_db: float | None = None,
    outer_upper_db: float | None = None,
    min_share_within_band: float = 1.0,
    min_fraction_above: float | None = None,
) -> SrsCheck:
    """Judge a measured SRS against a specified SRS and its tolerance bands.

    Parameters
    ----------
    freq_hz : array_like
        Natural frequencies of the measured SRS, inside the specified band
        [Hz].
    measured_g : array_like
        Measured SRS, > 0 [g].
    nominal_profile : SrsProfile or (freq_hz, accel_g)
        Specified SRS [Hz, g].
    lower_db, upper_db : float
        Tolerance band around nominal, e.g. -3 and +6 [dB].
    outer_lower_db, outer_upper_db : float, optional
        Wider band for the points allowed outside the band, e.g. -6 and +9
        [dB]. Give both or neither.
    min_share_within_band : float, optional
        Share of points that must lie within the band, in (0, 1] (e.g. 0.9
        for "over >= 90 % of the points") [unitless]. Default 1.0. Below 1
        an outer band is required: every other point must lie within it.
    min_fraction_above : float, optional
        Required fraction of points at or above nominal, e.g. 0.5 [unitless].

    Returns
    -------
    SrsCheck
        Per-frequency verdicts, worst point, fractions and the overall
        verdict with reasons.

    Notes
    -----
    ``dev = 20 log10(measured/nominal)``; a point is within the band if
    ``lower_db <= dev <= upper_db`` (edges included, to 1e-9 dB). Margin to
    the band ``min(upper_db - dev, dev - lower_db)``; the worst point has
    the least margin. Example rules: MIL-STD-810H 516.8 -1.5/+3 dB over
    >= 90 % with the rest within -3/+6 dB; NASA-STD-7003A +/-6 dB with
    >= 50 % at or above nominal (from memory, to verify against the printed documents).

    References
    ----------
    MIL-STD-810H (2019) Methods 516.8 and 517.3; NASA-STD-7003A (2011);
    GSFC-STD-7000B (GEVS) (tolerances from memory).
    """
    f = _validate.as_1d_float("freq_hz", freq_hz)
    _validate.all_positive("freq_hz", f)
    m = _validate.as_1d_float("measured_g", measured_g)
    if m.shape != f.shape:
        raise InputError("measured_g", f"{m.size} values", f"must match freq_hz ({f.size})")
    _validate.all_positive("measured_g", m)
    lo, hi = _band("lower_db", lower_db, "upper_db", upper_db)
    if (outer_lower_db is None) != (outer_upper_db is None):
        raise InputError("outer_lower_db/outer_upper_db", (outer_lower_db, outer_upper_db),
                         "give both or neither")
    olo = ohi = None
    if outer_lower_db is not None:
        olo, ohi = _band("outer_lower_db", outer_lower_db, "outer_upper_db", outer_upper_db)
        if olo > lo or ohi < hi:
            raise InputError("outer_lower_db/outer_upper_db", (olo, ohi),
                             f"must contain the band ({lo:g}, {hi:g}) dB")
    share_req = float(min_share_within_band)
    if not (0.0 < share_req <= 1.0):
        raise InputError("min_share_within_band", min_share_within_band, "must be in (0, 1]")
    if share_req < 1.0 and olo is None:
        raise InputError("min_share_within_band", min_share_within_band,
                         "below 1 needs an outer band for the other points")
    frac_req = None
    if min_fraction_above is not None:
        frac_req = float(min_fraction_above)
        if not (0.0 <= frac_req <= 1.0):
            raise InputError("min_fraction_above", min_fraction_above, "must be in [0, 1]")
    nom = _nominal_values(nominal_profile, f)
    dev = 20.0 * np.log10(m / nom)
    eps = 1e-9
    within = (dev >= lo - eps) & (dev <= hi + eps)
    if olo is None:
        ok = within
    else:
        ok = (dev >= olo - eps) & (dev <= ohi + eps)
    share = float(within.mean())
    above = float((dev >= -eps).mean())
    margin = np.minimum(hi - dev, dev - lo)
    w = int(np.argmin(margin))
    reasons = []
    if olo is None and not within.all():
        reasons.append(
            f"{int((~within).sum())} of {f.size} points outside {lo:+g}/{hi:+g} dB; worst"
            f" {dev[w]:+.2f} dB at {f[w]:.4g} Hz"
        )
    if olo is not None:
        if share < share_req - 1e-12:
            reasons.append(f"{share:.1%} of points within {lo:+g}/{hi:+g} dB, needs"
                           f" {share_req:.0%}")
        if not ok.all():
            wo = int(np.argmin(np.minimum(ohi - dev, dev - olo)))
            reasons.append(
                f"{int((~ok).sum())} points outside the outer band {olo:+g}/{ohi:+g} dB;"
                f" worst {dev[wo]:+.2f} dB at {f[wo]:.4g} Hz"
            )
    if frac_req is not None and above < frac_req - 1e-12:
        reasons.append(f"{above:.1%} of points at or above nominal, needs {frac_req:.0%}")
    return SrsCheck(
        freq_hz=f,
        measured_g=m,
        nominal_g=nom,
        deviation_db=dev,
        lower_db=lo,
        upper_db=hi,
        within_band=within,
        passed_per_freq=ok,
        share_within_band=share,
        fraction_at_or_above_nominal=above,
        worst_freq_hz=float(f[w]),
        worst_deviation_db=float(dev[w]),
        worst_margin_db=float(margin[w]),
        passed=not reasons,
        reasons=tuple(reasons),
        outer_lower_db=olo,
        outer_upper_db=ohi,
        min_share_within_band=share_req,
        min_fraction_above=frac_req,
    )


#: A sample-to-sample jump above this share of the peak counts as a step.
STEP_SHARE = 0.25
#: ... and exceeds both neighbouring jumps by this factor ...
STEP_RATIO = 4.0
#: ... and the RMS of the other jumps within STEP_WINDOW samples on either side by this.
STEP_RMS_RATIO = 8.0
STEP_WINDOW = 16
#: A kink (exactly linear stretch meeting samples off its line) whose second difference
#: exceeds this share of the peak is warned about for method="bandlimited".
KINK_SHARE = 0.01


def _step_jump(x: np.ndarray) -> float:
    """Largest one-sample jump that counts as a step [unit of x], 0 if none.

    A step: a jump above STEP_SHARE of the peak, STEP_RATIO times both neighbouring
    jumps (a sine sampled 5 times a cycle reaches 3.2 x) and STEP_RMS_RATIO times the
    RMS of the other jumps within STEP_WINDOW samples on either side (other candidates
    left out). White noise sampled to its Nyquist frequency passes the first two tests
    about once in 500 samples by chance; its largest ratio to that RMS in 1 M samples
    was 4.7 to 5.9 (five seeds, measured). Zero is assumed before and after the record.
    """
    peak = float(np.abs(x).max()) if x.size else 0.0
    if peak == 0.0:
        return 0.0
    d = np.abs(np.diff(np.concatenate([[0.0], x, [0.0]])))
    big = (d[1:-1] > STEP_SHARE * peak) & (d[1:-1] > STEP_RATIO * np.maximum(d[:-2], d[2:]))
    if not big.any():
        return 0.0
    k = np.flatnonzero(big) + 1  # index in d of each candidate jump
    w = STEP_WINDOW
    small = d.copy()
    small[k] = 0.0  # the RMS of the ordinary jumps: other candidates left out
    c = np.concatenate([[0.0], np.cumsum(small * small)])  # c[j] = sum of small[:j] ** 2
    lo, hi = np.maximum(k - w, 0), np.minimum(k + w + 1, d.size)
    others = (c[hi] - c[lo]) / (2 * w)
    step = d[k] > STEP_RMS_RATIO * np.sqrt(np.maximum(others, 0.0))
    return float(d[k][step].max()) if step.any() else 0.0


def _kink_bend(x: np.ndarray) -> float:
    """Largest second difference at a kink (an exactly linear stretch of the samples,
    e.g. zeros, meeting samples off its line) above KINK_SHARE of the peak [unit of x],
    0 if none."""
    peak = float(np.abs(x).max()) if x.size else 0.0
    if peak == 0.0:
        return 0.0
    xe = np.concatenate([[0.0, 0.0], x, [0.0, 0.0]])
    d2 = np.abs(xe[2:] - 2.0 * xe[1:-1] + xe[:-2])
    lin = d2 <= 1e-12 * peak
    kink = (d2[1:-1] > KINK_SHARE * peak) & (lin[:-2] | lin[2:])
    return float(d2[1:-1][kink].max()) if kink.any() else 0.0


def record_model(accel_g) -> str:
    """Input model that ``method="auto"`` uses for a record: "cubic" or "bandlimited".

    Parameters
    ----------
    accel_g : array_like
        Base acceleration samples [g].

    Returns
    -------
    str
        "cubic" when the record holds a step (a one-sample jump above 25 % of the
        peak, 4 x both neighbouring jumps and 8 x the RMS of the other jumps within
        16 samples) or a kink (an exactly linear stretch,
        e.g. zeros, meeting samples off its line with a second difference above 1 %
        of the peak): the band-limited reconstruction rings there (a 20-sample
        half-sine +0.9 %, a terminal-peak sawtooth +5 % at fs/5), the cubic hold
        takes them exactly (within 0.11 %). Otherwise "bandlimited" (smooth record:
        the FFT reconstruction, within 0.3 % up to fs/5). Measured in
        tests/dynamics/test_srs_between_samples.py; the rule is our own.
    """
    x = np.asarray(accel_g, dtype=float)
    return "cubic" if _step_jump(x) > 0.0 or _kink_bend(x) > 0.0 else "bandlimited"


def _method_warnings(method: str, x: np.ndarray, fn: np.ndarray, fs: float) -> list[str]:
    """Accuracy warnings of the "cubic" and "bandlimited" input models.

    The bounds are the worst errors measured against exact continuous-time
    responses in tests/dynamics/test_srs_between_samples.py (see
    docs/methods/srs.md).
    """
    out = []
    auto_cubic = method == "auto" and record_model(x) == "cubic"
    if method == "cubic" or auto_cubic:
        high = fn > fs / 8.0
        if high.any() and auto_cubic:
            out.append(
                f"method='auto' reads this record with the cubic hold (it has a step or a"
                f" kink, where a band-limited reconstruction rings): {int(high.sum())} natural"
                f" frequencies ({fn[high].min():g} to {fn[high].max():g} Hz) exceed an eighth"
                f" of the sample rate ({fs / 8:g} Hz), where its smooth content may read up to"
                f" 2.5 % low (steps and kinks themselves: within 0.5 %)"
            )
        elif high.any():
            out.append(
                f"{int(high.sum())} natural frequencies ({fn[high].min():g} to"
                f" {fn[high].max():g} Hz) exceed an eighth of the sample rate ({fs / 8:g} Hz):"
                f" the cubic input model may read up to 2.5 % off there on smooth records"
                f" (up to fs/5; method='bandlimited' is within 2 % on smooth records)"
            )
    above = fn > fs / 5.0
    if above.any():
        out.append(
            f"{int(above.sum())} natural frequencies ({fn[above].min():g} to"
            f" {fn[above].max():g} Hz) exceed a fifth of the sample rate ({fs / 5:g} Hz):"
            f" accuracy there is not verified (the SRS may read several % off); resample"
            f" the record to at least 5 x fn"
        )
    if method == "bandlimited" and x.size > 1:
        peak = float(np.abs(x).max())
        jump = _step_jump(x)
        hi = fn > fs / BANDLIMITED_MIN_RATIO
        if peak > 0 and jump > 0 and hi.any():
            out.append(
                f"the record has a step (a jump of {jump:g} g in one sample, {jump / peak:.0%} of"
                f" the peak): its band-limited reconstruction rings, the SRS above"
                f" {fs / BANDLIMITED_MIN_RATIO:g} Hz may read up to 6 % high; method='cubic'"
                f" keeps steps clean (within 0.5 %)"
            )
        elif peak > 0 and hi.any():
            # a kink: where an exactly linear stretch (e.g. zeros before a pulse) meets
            # samples off its line with a bend above KINK_SHARE of the peak
            bend = _kink_bend(x)
            if bend > 0:
                out.append(
                    f"the record has a kink (a pulse that starts or ends on an exactly linear"
                    f" stretch, e.g. zeros; bend {bend / peak:.0%} of the"
                    f" peak): its band-limited reconstruction rings, the SRS above"
                    f" {fs / BANDLIMITED_MIN_RATIO:g} Hz may read about 1 % high (a 20-sample"
                    f" half-sine: +0.9 %); method='cubic' takes the kink exactly (within 0.1 %)"
                )
    return out
