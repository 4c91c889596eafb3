"""Streaming analysis of long records: one chunk at a time, state carried between chunks.

Every analysis here is a small object with ``update(chunk)`` (any number of times,
chunks of any length, even one sample) and ``result()`` (once, at the end). What a
whole-record function would compute from the full array, the streaming object
computes from the chunks with memory that does not grow with the record:

- :class:`WelchStream`: Welch PSD (the samples of the segment in progress are carried);
- :class:`MaximaxStream`: maximax PSD (the windows still open are carried);
- :class:`SrsStream`: shock response spectrum (filter state and running extremes;
  the residual free decay is run at the end);
- :class:`ErsStream`: extreme response spectrum of a time history (pseudo-acceleration
  maximax SRS, as :func:`qualplan.dynamics.extreme.ers_shock`);
- :class:`FdsStream`: time-domain fatigue damage spectrum (filter state, reversal
  candidate and the rainflow residue carried across chunks);
- :class:`RainflowStream`: the rainflow cycles of a series (ASTM E1049-85 5.4.4);
- :class:`StatsStream`: mean, rms, standard deviation, extremes, skewness, kurtosis;
- :class:`ShockDetector`: shock events in a long record (threshold, pre- and
  post-event time), one SRS per event.

The recursions run in the same order as the whole-record versions, so the results
equal them to rounding (the tests in tests/dynamics/test_streaming.py require 1e-12
relative, and rainflow cycles equal exactly) whatever the chunking.

References
----------
.. [1] D. O. Smallwood, "An improved recursive formula for calculating shock response
   spectra", Shock and Vibration Bulletin 51 (2), 1981; ISO 18431-4:2007.
.. [2] ASTM E1049-85 (R2017), "Standard Practices for Cycle Counting in Fatigue
   Analysis", section 5.4.4.
.. [3] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra", IEEE Trans. Audio Electroacoust. AU-15(2), 1967.
.. [4] P. Pebay, "Formulas for robust, one-pass parallel computation of covariances
   and arbitrary-order statistical moments", Sandia report SAND2008-6212, 2008.
.. [5] NASA-HDBK-7005 (2001), Dynamic Environmental Criteria (maximax spectra).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba
import numpy as np
import scipy.fft
import scipy.signal

from qualplan.dynamics import _validate, sdof_filter
from qualplan.dynamics import signal as _signal
from qualplan.dynamics import srs as _srs
from qualplan.dynamics.errors import InputError
from qualplan.dynamics.rainflow import push_reversal, residue_damage
from qualplan.dynamics.units import G0_M_S2

__all__ = [
    "WelchStream",
    "MaximaxStream",
    "SrsStream",
    "ErsStream",
    "FdsStream",
    "RainflowStream",
    "StatsStream",
    "RecordStats",
    "ShockDetector",
    "ShockEvent",
    "feed",
]


def _chunk(chunk) -> np.ndarray:
    """A chunk as a finite, contiguous 1-D float64 array (may be empty)."""
    try:
        x = np.asarray(chunk, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError("chunk", chunk, "must be numbers") from exc
    if x.ndim != 1:
        raise InputError("chunk", f"shape {x.shape}", "must be one-dimensional (one channel)")
    bad = ~np.isfinite(x)
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(f"chunk[{i}]", float(x[i]), "must be finite (no NaN or inf)")
    return np.ascontiguousarray(x)


class _Stream:
    """Common bookkeeping: samples seen, and no update after the result."""

    def __init__(self) -> None:
        self.n_samples = 0
        self._done = False

    def _take(self, chunk) -> np.ndarray:
        if self._done:
            raise InputError("chunk", "after result()", "the stream is finished")
        x = _chunk(chunk)
        self.n_samples += x.size
        return x

    def _finish(self) -> None:
        if self._done:
            raise InputError("result", "called twice", "a stream gives its result once")
        self._done = True


def feed(stream, chunks):
    """Pass every chunk of an iterable to ``stream.update`` and return ``stream.result()``.

    Parameters
    ----------
    stream : any stream of this module
    chunks : iterable of array_like
        Consecutive pieces of one channel [g].

    Returns
    -------
    The stream's result.
    """
    for c in chunks:
        stream.update(c)
    return stream.result()


# --------------------------------------------------------------------------
# Welch and maximax PSD


def _welch_setup(fs_hz, resolution_hz, segment_s, overlap, window):
    fs = _validate.positive_scalar("fs_hz", fs_hz)
    try:
        ov = float(overlap)
    except (TypeError, ValueError) as exc:
        raise InputError("overlap", overlap, "must be a number in [0, 1)") from exc
    if not (0.0 <= ov < 1.0):
        raise InputError("overlap", overlap, "must be in [0, 1) (fraction of a segment)")
    if (resolution_hz is None) == (segment_s is None):
        raise InputError("resolution_hz", resolution_hz,
                         "give exactly one of resolution_hz or segment_s (a stream does not "
                         "know the record length in advance)")
    if resolution_hz is not None:
        nperseg = int(round(fs / _validate.positive_scalar("resolution_hz", resolution_hz)))
    else:
        nperseg = int(round(_validate.positive_scalar("segment_s", segment_s) * fs))
    if nperseg < 2:
        raise InputError("resolution_hz", resolution_hz, f"gives {nperseg} samples per segment")
    noverlap = min(int(round(ov * nperseg)), nperseg - 1)
    try:
        win = scipy.signal.get_window(window, nperseg)
    except (ValueError, TypeError) as exc:
        raise InputError("window", window, f"is not a scipy.signal window ({exc})") from exc
    return fs, nperseg, noverlap, win


def _segments_power(x: np.ndarray, nperseg: int, step: int, win: np.ndarray, count: int):
    """|FFT|^2 of `count` segments of x (mean removed, windowed), shape (count, nf)."""
    seg = np.lib.stride_tricks.as_strided(
        x, shape=(count, nperseg), strides=(x.strides[0] * step, x.strides[0]),
        writeable=False)
    y = seg - seg.mean(axis=1, keepdims=True)
    y *= win
    spec = scipy.fft.rfft(y, axis=1)
    return spec.real ** 2 + spec.imag ** 2


def _density(p_sum: np.ndarray, n: int, nperseg: int, fs: float, win: np.ndarray):
    """One-sided density from a sum of |FFT|^2 over n segments [g^2/Hz] (Welch 1967)."""
    p = p_sum / (n * fs * float(np.dot(win, win)))
    if nperseg % 2:
        p[..., 1:] *= 2.0
    else:
        p[..., 1:-1] *= 2.0
    return p


class _SegmentFeed(_Stream):
    """Cuts the incoming samples into Welch segments; keeps the unfinished tail."""

    _BLOCK = 2 ** 20  # samples FFT'd at once (bounded memory)

    def __init__(self, fs_hz, resolution_hz, segment_s, overlap, window) -> None:
        super().__init__()
        self.fs_hz, self.nperseg, self.noverlap, self._win = _welch_setup(
            fs_hz, resolution_hz, segment_s, overlap, window)
        self.window = window
        self._step = self.nperseg - self.noverlap
        self._tail = np.empty(0)
        self.n_segments = 0

    def _segments(self, chunk):
        """Yield (first segment index, |FFT|^2 of the segments completed by `chunk`)."""
        x = self._take(chunk)
        buf = np.concatenate((self._tail, x)) if self._tail.size else x
        if buf.size < self.nperseg:
            self._tail = buf.copy()
            return
        count = (buf.size - self.nperseg) // self._step + 1
        per_block = max(1, self._BLOCK // self.nperseg)
        for first in range(0, count, per_block):
            c = min(per_block, count - first)
            p = _segments_power(buf[first * self._step:], self.nperseg, self._step,
                                self._win, c)
            yield self.n_segments + first, p
        self.n_segments += count
        self._tail = buf[count * self._step:].copy()


class WelchStream(_SegmentFeed):
    """Welch PSD of one channel, fed chunk by chunk.

    Parameters
    ----------
    fs_hz : float
        Sample rate [Hz].
    resolution_hz : float, optional
        Line spacing [Hz]; ``nperseg = round(fs / resolution_hz)``.
    segment_s : float, optional
        Segment length [s]; exactly one of `resolution_hz` and `segment_s`.
    overlap : float
        Overlap of consecutive segments [fraction], default 0.5.
    window : str or tuple
        scipy.signal window, default ``"hann"``.

    Notes
    -----
    The same estimate as :func:`qualplan.dynamics.signal.welch_psd` (and
    ``scipy.signal.welch`` with ``detrend='constant'``): segments start every
    ``nperseg - noverlap`` samples from the first; the samples of a segment not yet
    complete are carried to the next chunk (fewer than ``nperseg``).

    References
    ----------
    Welch 1967 (IEEE Trans. Audio Electroacoust. AU-15); Bendat & Piersol, Random
    Data, 4th ed., 2010, ch. 11.
    """

    def __init__(self, fs_hz: float, *, resolution_hz: float | None = None,
                 segment_s: float | None = None, overlap: float = 0.5,
                 window="hann") -> None:
        super().__init__(fs_hz, resolution_hz, segment_s, overlap, window)
        self._acc = np.zeros(self.nperseg // 2 + 1)

    def update(self, chunk) -> None:
        """Add the next samples of the channel [g]."""
        for _first, p in self._segments(chunk):
            self._acc += p.sum(axis=0)

    def result(self) -> _signal.WelchPsd:
        """The Welch PSD of everything fed so far (:class:`~qualplan.dynamics.signal.WelchPsd`)."""
        self._finish()
        if self.n_segments == 0:
            raise InputError("chunks", f"{self.n_samples} samples",
                             f"are shorter than one Welch segment ({self.nperseg} samples)")
        fs, nperseg, win = self.fs_hz, self.nperseg, self._win
        p = _density(self._acc, self.n_segments, nperseg, fs, win)
        n_d, dof, err = _signal.welch_dof(win, nperseg, self.noverlap, self.n_segments)
        df = fs / nperseg
        return _signal.WelchPsd(
            freq_hz=np.fft.rfftfreq(nperseg, 1.0 / fs), asd_g2_hz=p, fs_hz=fs,
            resolution_hz=df, enbw_hz=fs * float(np.dot(win, win)) / float(np.sum(win)) ** 2,
            nperseg=nperseg, noverlap=self.noverlap, n_segments=self.n_segments,
            window=self.window if isinstance(self.window, str) else repr(self.window),
            n_averages=n_d, dof=dof, random_error=err,
            grms=math.sqrt(float(np.sum(p)) * df), duration_s=self.n_samples / fs)


class MaximaxStream(_SegmentFeed):
    """Maximax PSD of one channel, fed chunk by chunk.

    Parameters
    ----------
    fs_hz : float
        Sample rate [Hz].
    window_s : float
        Length of each (assumed stationary) averaging window [s], default 1 s.
    window_overlap : float
        Overlap of consecutive windows [fraction], default 0.5.
    resolution_hz, segment_s, overlap, window
        Welch settings inside each window (as :class:`WelchStream`). When neither
        `resolution_hz` nor `segment_s` is given, the segment is the default of
        :func:`qualplan.dynamics.signal.maximax_psd` for the window length.

    Notes
    -----
    Windows of ``spw`` whole segments start every ``wstep`` segments, exactly as in
    :func:`qualplan.dynamics.signal.maximax_psd`; each open window (at most
    ``ceil(spw / wstep)`` at a time) keeps its own sum of segment periodograms, so
    memory is a few spectra whatever the record length.

    References
    ----------
    NASA-HDBK-7005 (2001), maximax spectra of non-stationary data; Piersol, NASA
    CR-341 (1965); Welch 1967.
    """

    def __init__(self, fs_hz: float, *, window_s: float = 1.0, window_overlap: float = 0.5,
                 resolution_hz: float | None = None, segment_s: float | None = None,
                 overlap: float = 0.5, window="hann") -> None:
        fs = _validate.positive_scalar("fs_hz", fs_hz)
        wlen_s = _validate.positive_scalar("window_s", window_s)
        try:
            wov = float(window_overlap)
        except (TypeError, ValueError) as exc:
            raise InputError("window_overlap", window_overlap,
                             "must be a number in [0, 1)") from exc
        if not (0.0 <= wov < 1.0):
            raise InputError("window_overlap", window_overlap, "must be in [0, 1)")
        n_win = int(round(wlen_s * fs))
        if resolution_hz is None and segment_s is None:
            seg = _signal.default_nperseg(n_win, float(overlap)) if n_win >= 2 else 2
            segment_s = seg / fs
        super().__init__(fs, resolution_hz, segment_s, overlap, window)
        if n_win < self.nperseg:
            raise InputError("window_s", window_s,
                             f"is shorter than one Welch segment ({self.nperseg / fs:g} s)")
        self._wlen_s = wlen_s
        self.spw = (n_win - self.nperseg) // self._step + 1
        self.wstep = max(1, int(round(self.spw * (1.0 - wov))))
        nf = self.nperseg // 2 + 1
        self._open: dict[int, np.ndarray] = {}  # window start (segment index) -> sum
        self._best = np.full(nf, -np.inf)
        self._best_start = np.zeros(nf, dtype=np.int64)
        self._grms2_max = -np.inf
        self.n_windows = 0

    def _close(self, start: int, total: np.ndarray) -> None:
        pw = _density(total, self.spw, self.nperseg, self.fs_hz, self._win)
        better = pw > self._best
        self._best[better] = pw[better]
        self._best_start[better] = start
        self._grms2_max = max(self._grms2_max, float(pw.sum()))
        self.n_windows += 1

    def update(self, chunk) -> None:
        """Add the next samples of the channel [g]."""
        spw, wstep = self.spw, self.wstep
        for first, p in self._segments(chunk):
            last = first + p.shape[0]  # segments first .. last-1 are in p
            # windows that start inside this block of segments
            s0 = -(-first // wstep) * wstep
            for s in range(s0, last, wstep):
                self._open[s] = np.zeros(p.shape[1])
            for s in sorted(self._open):
                lo, hi = max(s, first), min(s + spw, last)
                if hi > lo:
                    self._open[s] += p[lo - first:hi - first].sum(axis=0)
                if s + spw <= last:
                    self._close(s, self._open.pop(s))

    def result(self) -> _signal.MaximaxPsd:
        """The maximax PSD (:class:`~qualplan.dynamics.signal.MaximaxPsd`)."""
        self._finish()
        if self.n_windows == 0:
            span = f"{self.n_samples} samples ({self.n_samples / self.fs_hz:g} s)"
            raise InputError("chunks", span,
                             f"are shorter than one maximax window ({self._wlen_s:g} s)")
        fs, step = self.fs_hz, self._step
        df = fs / self.nperseg
        n_d, dof, err = _signal.welch_dof(self._win, self.nperseg, self.noverlap, self.spw)
        return _signal.MaximaxPsd(
            freq_hz=np.fft.rfftfreq(self.nperseg, 1.0 / fs), asd_g2_hz=self._best.copy(),
            time_of_max_s=self._best_start * step / fs,
            window_s=(self.nperseg + (self.spw - 1) * step) / fs,
            window_step_s=self.wstep * step / fs, n_windows=int(self.n_windows),
            nperseg=self.nperseg, noverlap=self.noverlap, segments_per_window=int(self.spw),
            resolution_hz=df, n_averages=n_d, dof=dof, random_error=err,
            grms_max=math.sqrt(self._grms2_max * df), fs_hz=fs)


# --------------------------------------------------------------------------
# SRS / ERS: filter state and running extremes


@numba.njit(parallel=True, cache=True)
def _extremes_chunk(x, b, a, state):  # pragma: no cover - compiled
    """Run each filter over chunk x from its state; update running max and min.

    state[i] = (x_(k-1), x_(k-2), y_(k-1), y_(k-2), max, min).
    """
    n = x.shape[0]
    for i in numba.prange(b.shape[0]):
        b0, b1, b2 = b[i, 0], b[i, 1], b[i, 2]
        a1, a2 = a[i, 1], a[i, 2]
        x1, x2, y1, y2 = state[i, 0], state[i, 1], state[i, 2], state[i, 3]
        hi, lo = state[i, 4], state[i, 5]
        for k in range(n):
            x0 = x[k]
            y0 = b0 * x0 + b1 * x1 + b2 * x2 - a1 * y1 - a2 * y2
            hi = max(hi, y0)
            lo = min(lo, y0)
            x2 = x1
            x1 = x0
            y2 = y1
            y1 = y0
        state[i, 0], state[i, 1], state[i, 2], state[i, 3] = x1, x2, y1, y2
        state[i, 4], state[i, 5] = hi, lo


@numba.njit(cache=True)
def _free_decay_extremes(b, a, state, n_extra, out):  # pragma: no cover - compiled
    """Max and min from the last sample through n_extra[i] zero-input samples."""
    for i in range(b.shape[0]):
        b1, b2 = b[i, 1], b[i, 2]
        a1, a2 = a[i, 1], a[i, 2]
        x1, x2, y1, y2 = state[i, 0], state[i, 1], state[i, 2], state[i, 3]
        hi = y1
        lo = y1
        for _k in range(n_extra[i]):
            y0 = b1 * x1 + b2 * x2 - a1 * y1 - a2 * y2
            hi = max(hi, y0)
            lo = min(lo, y0)
            x2 = x1
            x1 = 0.0
            y2 = y1
            y1 = y0
        out[i, 0] = hi
        out[i, 1] = lo


def _residual_samples(fn: np.ndarray, q: float, dt: float) -> np.ndarray:
    """Free-decay length after the record: one damped period plus two samples [samples].

    The same rule as the whole-record SRS (docs/methods/srs.md): the extrema of a
    free damped oscillation are half a damped period apart and decrease.
    """
    zeta = 1.0 / (2.0 * q)
    period = 1.0 / (fn * math.sqrt(1.0 - zeta * zeta))
    return np.ceil(period / dt).astype(np.int64) + 2


class _FilterBank:
    """A bank of SDOF filters with carried state (internal)."""

    def __init__(self, fn, q, dt, output):
        self.b, self.a = sdof_filter.coefficients(fn, q, dt, output=output)
        self.b = np.ascontiguousarray(self.b)
        self.a = np.ascontiguousarray(self.a)
        self.state = np.zeros((fn.size, 6))
        self.state[:, 4] = -np.inf
        self.state[:, 5] = np.inf

    def update(self, x):
        if x.size:
            _extremes_chunk(x, self.b, self.a, self.state)

    def extremes(self, n_extra):
        """(max during, min during, max after, min after) per filter."""
        out = np.empty((self.b.shape[0], 2))
        _free_decay_extremes(self.b, self.a, self.state, n_extra, out)
        return self.state[:, 4].copy(), self.state[:, 5].copy(), out[:, 0], out[:, 1]


class SrsStream(_Stream):
    """Shock response spectrum of one channel, fed chunk by chunk.

    Parameters
    ----------
    dt_s : float
        Sample step [s].
    fn_hz : array_like
        Natural frequencies [Hz], below the Nyquist frequency.
    q : float
        Amplification Q = 1/(2 zeta) [unitless], > 0.5. Default 10.
    pseudo_velocity : bool
        Also compute the maximax pseudo-velocity SRS [unitless flag].

    Notes
    -----
    Smallwood's ramp-invariant filters (:func:`qualplan.dynamics.sdof_filter.coefficients`)
    run over each chunk from the state left by the previous one (two past inputs, two
    past outputs per natural frequency); only the running extremes are kept. At the
    end the residual free decay (one damped period) is run from that state, as in
    :func:`qualplan.dynamics.srs.shock_response_spectrum`. Peaks are the sampled
    extremes.

    References
    ----------
    Smallwood 1981 (Shock and Vibration Bulletin 51); ISO 18431-4:2007.
    """

    def __init__(self, dt_s: float, fn_hz, q: float = 10.0, *,
                 pseudo_velocity: bool = False) -> None:
        super().__init__()
        self.fn_hz, self.q, self.dt_s = sdof_filter.check_inputs(fn_hz, q, dt_s)
        self._acc = _FilterBank(self.fn_hz, self.q, self.dt_s, "abs_accel")
        self._pv = (_FilterBank(self.fn_hz, self.q, self.dt_s, "pseudo_vel")
                    if pseudo_velocity else None)
        self._peak = 0.0
        self._last = 0.0

    def update(self, chunk) -> None:
        """Add the next samples of the channel [g]."""
        x = self._take(chunk)
        if not x.size:
            return
        self._peak = max(self._peak, float(np.abs(x).max()))
        self._last = float(x[-1])
        self._acc.update(x)
        if self._pv is not None:
            self._pv.update(x)

    def _warnings(self) -> tuple[str, ...]:
        fn, dt = self.fn_hz, self.dt_s
        out = []
        fs = 1.0 / dt
        high = fn > 0.1 * fs
        if high.any():
            worst = 1.0 - math.cos(math.pi * float(fn[high].max()) / fs)
            out.append(
                f"{int(high.sum())} natural frequencies ({fn[high].min():g} to "
                f"{fn[high].max():g} Hz) exceed a tenth of the sample rate ({0.1 * fs:g} Hz): "
                f"peaks between samples may be missed, the SRS there may read up to "
                f"{worst:.1%} low; resample the record to at least 10 x fn")
        if self._peak > 0 and abs(self._last) > _srs.TRUNCATION_SHARE * self._peak:
            out.append(
                f"the record ends while the input is still active (last sample "
                f"{self._last:g} g = {abs(self._last) / self._peak:.0%} of the peak "
                f"{self._peak:g} g): it may be truncated; the residual spectrum assumes the "
                f"input drops to zero within one sample after the end")
        duration = (self.n_samples - 1) * dt
        if duration * fn.min() < 1.0:
            out.append(
                f"primary spectrum: the record ({duration:g} s) is shorter than one period "
                f"of the lowest natural frequency ({fn.min():g} Hz)")
        return tuple(out)

    def result(self) -> _srs.SrsResult:
        """All kinds of SRS [g] (:class:`~qualplan.dynamics.srs.SrsResult`)."""
        self._finish()
        if self.n_samples < 2:
            raise InputError("chunks", f"{self.n_samples} samples", "needs at least 2")
        n_extra = _residual_samples(self.fn_hz, self.q, self.dt_s)
        hi_p, lo_p, hi_r, lo_r = self._acc.extremes(n_extra)
        primary = np.maximum(hi_p, -lo_p)
        residual = np.maximum(hi_r, -lo_r)
        pv = None
        if self._pv is not None:
            e = self._pv.extremes(n_extra)
            pv = np.max(np.abs(np.stack(e, axis=1)), axis=1)
        return _srs.SrsResult(
            fn_hz=self.fn_hz, q=self.q,
            maximax_g=np.maximum(primary, residual),
            positive_g=np.maximum(np.maximum(hi_p, hi_r), 0.0),
            negative_g=np.maximum(np.maximum(-lo_p, -lo_r), 0.0),
            primary_g=primary, residual_g=residual, pseudo_vel_m_s=pv,
            dt_s=self.dt_s, duration_s=(self.n_samples - 1) * self.dt_s,
            residual_extension_s=float(n_extra.max() * self.dt_s),
            warnings=self._warnings())


class ErsStream(SrsStream):
    """Extreme response spectrum of a time history, fed chunk by chunk.

    Parameters
    ----------
    dt_s : float
        Sample step [s].
    fn_hz : array_like
        Natural frequencies [Hz], below the Nyquist frequency.
    q : float
        Amplification Q [unitless], > 0.5. Default 10.

    Notes
    -----
    The pseudo-acceleration convention of
    :func:`qualplan.dynamics.extreme.ers_shock`: ``ERS = wn^2 max|z| / g0`` over the
    record and its residual free decay, from the ramp-invariant relative-displacement
    filter (Smallwood 1981; ISO 18431-4). :meth:`result` returns the ERS [g].

    References
    ----------
    C. Lalanne, Mechanical Vibration and Shock Analysis, vol. 5, ISTE/Wiley, 2009
    (extreme response spectrum); Smallwood 1981.
    """

    def __init__(self, dt_s: float, fn_hz, q: float = 10.0) -> None:
        super().__init__(dt_s, fn_hz, q, pseudo_velocity=True)

    def result(self) -> np.ndarray:  # type: ignore[override]
        """ERS at each natural frequency [g]."""
        res = super().result()
        return res.pseudo_vel_m_s * 2.0 * np.pi * self.fn_hz / G0_M_S2


# --------------------------------------------------------------------------
# Time-domain FDS: filter + reversals + rainflow residue carried across chunks


@numba.njit(cache=True, nogil=True)
def _vertex(ym, y0, yp):
    """Parabolic peak through three equally spaced samples around a reversal."""
    den = ym - 2.0 * y0 + yp
    if den == 0.0:
        return y0
    p = 0.5 * (ym - yp) / den
    return y0 - 0.25 * (ym - yp) * p


@numba.njit(parallel=True, cache=True)
def _fds_chunk(x, n_zero, bp, az, fstate, istate, stack, dmg, b, interp,
               n_skip, kstart):  # pragma: no cover - compiled
    """Filter, find reversals, rainflow-count and sum damage over one chunk, per fn.

    Input of filter i: x followed by n_zero[i] zero samples, from position kstart[i].
    fstate[i] = (x1, x2, y1, y2, xprev, xc, dl); istate[i] = (samples filtered, sp).
    A filter stops early (returns its position in kstart) when its rainflow stack is
    full; the caller grows the stack and calls again. kstart[i] = -1 when done.
    """
    n = x.shape[0]
    cap = stack.shape[1]
    for i in numba.prange(bp.shape[0]):
        if kstart[i] < 0:
            continue
        b0, b1, b2 = bp[i, 0], bp[i, 1], bp[i, 2]
        a1, a2 = az[i, 1], az[i, 2]
        x1, x2, y1, y2 = fstate[i, 0], fstate[i, 1], fstate[i, 2], fstate[i, 3]
        xprev, xc, dl = fstate[i, 4], fstate[i, 5], fstate[i, 6]
        g = istate[i, 0]
        sp = istate[i, 1]
        d_i = dmg[i]
        st = stack[i]
        total = n + n_zero[i]
        k = kstart[i]
        stopped = -1
        while k < total:
            if sp >= cap - 1:
                stopped = k
                break
            xin = x[k] if k < n else 0.0
            y = b0 * xin + b1 * x1 + b2 * x2 - a1 * y1 - a2 * y2
            x2 = x1
            x1 = xin
            y2 = y1
            y1 = y
            if g > n_skip + 1:
                if y != xc:
                    dn = y - xc
                    if dl * dn < 0.0:
                        val = _vertex(xprev, xc, y) if interp else xc
                        sp, d = push_reversal(st, sp, val, b)
                        d_i += d
                    xprev = xc
                    xc = y
                    dl = dn
            elif g == n_skip:
                sp, d = push_reversal(st, 0, y, b)
                d_i = d
                xprev = y
            elif g == n_skip + 1:
                xc = y
                dl = y - xprev
            g += 1
            k += 1
        fstate[i, 0], fstate[i, 1], fstate[i, 2], fstate[i, 3] = x1, x2, y1, y2
        fstate[i, 4], fstate[i, 5], fstate[i, 6] = xprev, xc, dl
        istate[i, 0] = g
        istate[i, 1] = sp
        dmg[i] = d_i
        kstart[i] = stopped


@numba.njit(cache=True)
def _fds_close(fstate, istate, stack, dmg, b, out):  # pragma: no cover - compiled
    """Push the last sample and add the half cycles of the residue."""
    for i in range(fstate.shape[0]):
        sp = istate[i, 1]
        st = stack[i]
        sp, d = push_reversal(st, sp, fstate[i, 5], b)
        out[i] = dmg[i] + d + residue_damage(st, sp, b)


class FdsStream(_Stream):
    """Time-domain fatigue damage spectrum of one channel, fed chunk by chunk.

    Parameters
    ----------
    dt_s : float
        Sample step [s].
    fn_hz : array_like
        Natural frequencies [Hz], below the Nyquist frequency.
    q : float
        Amplification factor, > 0.5 [unitless].
    b : float
        Basquin exponent, > 0 [unitless].
    free_decay : bool
        At the end, run each oscillator on with zero input until its free response
        has decayed by 1e-4 (``ln(1e4) / (zeta wn)`` s), so a shock's residual
        vibration is counted. Default False.
    interpolate_peaks : bool
        Replace each reversal by the vertex of the parabola through it and its two
        neighbouring samples (default True); False counts the raw samples.
    skip_s : float
        Count cycles only after this time [s] (the oscillators start at rest at t = 0
        and are filtered from the first sample). Default 0.

    Notes
    -----
    The convention of :func:`qualplan.dynamics.fatigue.fds_time`: pseudo-acceleration
    response ``wn^2 z / g0`` of the ramp-invariant relative-displacement filter,
    rainflow cycles of ASTM E1049-85 5.4.4, Basquin with unit constants and Miner's
    sum, ``D = sum n_i (range_i / 2)^b`` [g^b]. Per natural frequency the stream
    carries the filter state (two inputs, two outputs), the reversal candidate and
    the sample before it, and the rainflow stack (the residue: the reversals not yet
    closed into cycles, which stays short for a stationary record). The damage of
    each cycle is added in the order it closes, as in the whole-record count, so the
    result does not depend on the chunking.

    References
    ----------
    ASTM E1049-85 (R2017) section 5.4.4; Smallwood 1981; C. Lalanne, Mechanical
    Vibration and Shock Analysis, vol. 4, ISTE/Wiley, 2009.
    """

    _STACK0 = 256

    def __init__(self, dt_s: float, fn_hz, q: float, b: float, *, free_decay: bool = False,
                 interpolate_peaks: bool = True, skip_s: float = 0.0) -> None:
        super().__init__()
        self.fn_hz, self.q, self.dt_s = sdof_filter.check_inputs(fn_hz, q, dt_s)
        self.b = _validate.positive_scalar("b", b)
        try:
            skip = float(skip_s)
        except (TypeError, ValueError) as exc:
            raise InputError("skip_s", skip_s, "must be a number") from exc
        if not np.isfinite(skip) or skip < 0:
            raise InputError("skip_s", skip_s, "must be a finite time >= 0")
        self._skip_s = skip_s
        self._n_skip = int(round(skip / self.dt_s))
        fn = self.fn_hz
        bz, az = sdof_filter.coefficients(fn, self.q, self.dt_s, output="rel_disp")
        scale = (2.0 * np.pi * fn) ** 2 / G0_M_S2
        self._bp = np.ascontiguousarray(bz * scale[:, None])
        self._az = np.ascontiguousarray(az)
        self._interp = bool(interpolate_peaks)
        if free_decay:
            zeta = 1.0 / (2.0 * self.q)
            self._n_extra = np.ceil(
                math.log(1e4) / (zeta * 2 * np.pi * fn * self.dt_s)).astype(np.int64)
        else:
            self._n_extra = np.zeros(fn.size, dtype=np.int64)
        self._f = np.zeros((fn.size, 7))
        self._i = np.zeros((fn.size, 2), dtype=np.int64)
        self._stack = np.empty((fn.size, self._STACK0))
        self._dmg = np.zeros(fn.size)

    @property
    def residue_size(self) -> np.ndarray:
        """Reversals held on each rainflow stack (the residue) [count]."""
        return self._i[:, 1].copy()

    def _run(self, x: np.ndarray, n_zero: np.ndarray) -> None:
        kstart = np.zeros(self.fn_hz.size, dtype=np.int64)
        while True:
            _fds_chunk(x, n_zero, self._bp, self._az, self._f, self._i, self._stack,
                       self._dmg, self.b, self._interp, self._n_skip, kstart)
            if (kstart < 0).all():
                return
            grown = np.empty((self._stack.shape[0], 2 * self._stack.shape[1]))
            grown[:, :self._stack.shape[1]] = self._stack
            self._stack = grown

    def update(self, chunk) -> None:
        """Add the next samples of the channel [g]."""
        x = self._take(chunk)
        if x.size:
            self._run(x, np.zeros(self.fn_hz.size, dtype=np.int64))

    def result(self) -> np.ndarray:
        """D(fn) [g^b], one value per natural frequency."""
        self._finish()
        if self.n_samples < 2:
            raise InputError("chunks", f"{self.n_samples} samples", "needs at least 2")
        if self._n_skip > self.n_samples - 2:
            raise InputError("skip_s", self._skip_s,
                             f"leaves fewer than 2 samples of the {self.n_samples}")
        if self._n_extra.any():
            self._run(np.empty(0), self._n_extra)
        out = np.empty(self.fn_hz.size)
        _fds_close(self._f, self._i, self._stack, self._dmg, self.b, out)
        return out


# --------------------------------------------------------------------------
# Rainflow cycles of a series


@numba.njit(cache=True)
def _rf_push(stack, sp, val, out, k):  # pragma: no cover - compiled
    """Push a reversal on the rainflow stack; write the cycles it closes to out[k:]."""
    stack[sp] = val
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
    return sp, k


@numba.njit(cache=True)
def _rainflow_chunk(x, st, stack, out):  # pragma: no cover - compiled
    """Reversals of x (carried state st) pushed on the rainflow stack; cycles to out.

    st = [phase (0: no sample yet, 1: one sample, 2: more), last sample, slope into
    it, stack depth]; returns the number of cycles written. The caller sizes the
    stack for every reversal of this chunk.
    """
    phase = int(st[0])
    xc = st[1]
    dl = st[2]
    sp = int(st[3])
    k = 0
    for i in range(x.shape[0]):
        xn = x[i]
        if phase == 0:
            sp, k = _rf_push(stack, sp, xn, out, k)  # the first sample is a reversal
            xc = xn
            phase = 1
        elif phase == 1:
            dl = xn - xc
            xc = xn
            phase = 2
        elif xn != xc:
            dn = xn - xc
            if dl * dn < 0.0:
                sp, k = _rf_push(stack, sp, xc, out, k)
            xc = xn
            dl = dn
    st[0] = phase
    st[1] = xc
    st[2] = dl
    st[3] = sp
    return k


@numba.njit(cache=True)
def _rainflow_close(st, stack, out):  # pragma: no cover - compiled
    """Push the last sample (a reversal by definition), then the residue as half cycles."""
    sp = int(st[3])
    k = 0
    if st[0] == 2:
        sp, k = _rf_push(stack, sp, st[1], out, k)
    for j in range(sp - 1):
        out[k, 0] = abs(stack[j + 1] - stack[j])
        out[k, 1] = 0.5 * (stack[j] + stack[j + 1])
        out[k, 2] = 0.5
        k += 1
    return k


class RainflowStream(_Stream):
    """Rainflow cycles of a series fed chunk by chunk (ASTM E1049-85 section 5.4.4).

    Notes
    -----
    Carries the last sample, the slope into it and the rainflow stack (the
    reversals not yet closed). :meth:`result` returns the same rows in the same
    order as :func:`qualplan.dynamics.rainflow.count` of the whole series: range,
    mean, count (1.0 full cycle, 0.5 half cycle) [unit of the series; count
    unitless]. The cycles themselves are kept (one row per cycle); for long records
    use :class:`FdsStream`, which keeps only the damage.

    References
    ----------
    ASTM E1049-85 (R2017), section 5.4.4.
    """

    def __init__(self) -> None:
        super().__init__()
        self._st = np.zeros(4)
        self._stack = np.empty(16)
        self._rows: list[np.ndarray] = []

    def _room(self, extra: int) -> int:
        sp = int(self._st[3])
        if self._stack.size < sp + extra:
            grown = np.empty(2 * (sp + extra))
            grown[:sp] = self._stack[:sp]
            self._stack = grown
        return sp

    def update(self, chunk) -> None:
        """Add the next samples of the series [any unit]."""
        x = self._take(chunk)
        sp = self._room(x.size + 2)
        out = np.empty((x.size + sp + 1, 3))
        k = _rainflow_chunk(x, self._st, self._stack, out)
        if k:
            self._rows.append(out[:k].copy())

    def result(self) -> np.ndarray:
        """Cycles, shape (k, 3): range [unit], mean [unit], count [unitless]."""
        self._finish()
        sp = self._room(2)
        out = np.empty((sp + 2, 3))
        k = _rainflow_close(self._st, self._stack, out)
        rows = self._rows + [out[:k]]
        return np.concatenate(rows)


# --------------------------------------------------------------------------
# Statistics


@dataclass(frozen=True)
class RecordStats:
    """Statistics of one channel.

    Attributes
    ----------
    n_samples : int
        Samples [count].
    duration_s : float
        ``n_samples / fs`` [s].
    mean_g, rms_g, std_g : float
        Mean, root mean square and standard deviation (population, divisor n) [g].
    min_g, max_g, peak_g : float
        Smallest and largest sample, largest |sample| [g].
    crest_factor : float
        ``peak / rms`` [unitless] (inf for an all-zero record).
    skewness, kurtosis : float
        ``m3 / m2^1.5`` and ``m4 / m2^2`` (3 for a Gaussian) of the central moments
        [unitless]; NaN for a constant record.
    """

    n_samples: int
    duration_s: float
    mean_g: float
    rms_g: float
    std_g: float
    min_g: float
    max_g: float
    peak_g: float
    crest_factor: float
    skewness: float
    kurtosis: float


class StatsStream(_Stream):
    """Mean, rms, standard deviation, extremes, skewness and kurtosis, chunk by chunk.

    Parameters
    ----------
    fs_hz : float
        Sample rate [Hz] (for the duration).

    Notes
    -----
    Each chunk's count, mean and central moment sums M2, M3, M4 are computed about
    the chunk's own mean and merged into the running ones with the pairwise update
    formulas of Pebay (2008), eq. 3.1 (Chan, Golub and LeVeque 1979 for M2); no sum
    of raw powers is formed, so there is no cancellation for records with a large
    mean.

    References
    ----------
    P. Pebay, SAND2008-6212, 2008; T. F. Chan, G. H. Golub, R. J. LeVeque,
    "Updating formulae and a pairwise algorithm for computing sample variances",
    Stanford CS report STAN-CS-79-773, 1979.
    """

    def __init__(self, fs_hz: float) -> None:
        super().__init__()
        self.fs_hz = _validate.positive_scalar("fs_hz", fs_hz)
        self._mean = 0.0
        self._m2 = 0.0
        self._m3 = 0.0
        self._m4 = 0.0
        self._sumsq = 0.0
        self._min = math.inf
        self._max = -math.inf

    def update(self, chunk) -> None:
        """Add the next samples of the channel [g]."""
        n_a = self.n_samples
        x = self._take(chunk)
        n_b = x.size
        if not n_b:
            return
        mean_b = float(x.mean())
        d = x - mean_b
        d2 = d * d
        m2_b = float(d2.sum())
        m3_b = float(np.dot(d2, d))
        m4_b = float(np.dot(d2, d2))
        self._sumsq += float(np.dot(x, x))
        self._min = min(self._min, float(x.min()))
        self._max = max(self._max, float(x.max()))
        n = n_a + n_b
        delta = mean_b - self._mean
        m2_a, m3_a = self._m2, self._m3
        self._m4 = (self._m4 + m4_b
                    + delta ** 4 * n_a * n_b * (n_a * n_a - n_a * n_b + n_b * n_b) / n ** 3
                    + 6.0 * delta * delta * (n_a * n_a * m2_b + n_b * n_b * m2_a) / (n * n)
                    + 4.0 * delta * (n_a * m3_b - n_b * m3_a) / n)
        self._m3 = (m3_a + m3_b + delta ** 3 * n_a * n_b * (n_a - n_b) / (n * n)
                    + 3.0 * delta * (n_a * m2_b - n_b * m2_a) / n)
        self._m2 = m2_a + m2_b + delta * delta * n_a * n_b / n
        self._mean += delta * n_b / n

    def result(self) -> RecordStats:
        """The statistics (:class:`RecordStats`)."""
        self._finish()
        n = self.n_samples
        if n == 0:
            raise InputError("chunks", "0 samples", "needs at least 1")
        rms = math.sqrt(self._sumsq / n)
        var = self._m2 / n
        peak = max(abs(self._min), abs(self._max))
        if var > 0:
            skew = (self._m3 / n) / var ** 1.5
            kurt = (self._m4 / n) / (var * var)
        else:
            skew = kurt = math.nan
        return RecordStats(
            n_samples=n, duration_s=n / self.fs_hz, mean_g=self._mean, rms_g=rms,
            std_g=math.sqrt(var), min_g=self._min, max_g=self._max, peak_g=peak,
            crest_factor=peak / rms if rms > 0 else math.inf, skewness=skew, kurtosis=kurt)


# --------------------------------------------------------------------------
# Shock events


@dataclass(frozen=True)
class ShockEvent:
    """One shock event found in a long record.

    Attributes
    ----------
    start_s, end_s : float
        Time of the first and last sample of the event's window (threshold crossing
        minus the pre-event time, last crossing plus the post-event time, clipped to
        the record) [s].
    first_crossing_s : float
        Time of the first sample at or above the threshold [s].
    peak_g : float
        Largest |sample| in the window [g].
    time_of_peak_s : float
        Time of that sample [s].
    srs : SrsResult
        SRS of the window's samples [g] (:func:`qualplan.dynamics.srs.shock_response_spectrum`).
    """

    start_s: float
    end_s: float
    first_crossing_s: float
    peak_g: float
    time_of_peak_s: float
    srs: _srs.SrsResult


class ShockDetector(_Stream):
    """Shock events in a long record, one SRS per event, chunk by chunk.

    Parameters
    ----------
    dt_s : float
        Sample step [s].
    threshold_g : float
        A sample with ``|a| >= threshold_g`` belongs to an event [g], > 0.
    pre_s, post_s : float
        Time kept before the first and after the last threshold crossing of an
        event [s], >= 0.
    fn_hz : array_like
        Natural frequencies of each event's SRS [Hz].
    q : float
        Amplification Q of each event's SRS [unitless], default 10.
    max_event_s : float
        Longest event accepted [s] (default 60 s): a longer one means the threshold
        is within the background vibration, and the detector stops with an error
        rather than hold an unbounded window in memory.

    Notes
    -----
    Crossings closer than ``pre_s + post_s`` belong to the same event, so event
    windows never overlap. The window of an event is
    ``[first crossing - pre_s, last crossing + post_s]`` clipped to the record; its
    SRS is that of the window's samples alone (oscillators at rest at its start,
    residual free decay after its end), as for a shock recorded on its own
    (common practice for transient events in a long record; ISO 18431-4 for the
    SRS itself). Memory: the pre-event samples and the open event's window.

    References
    ----------
    ISO 18431-4:2007 (SRS); Smallwood 1981.
    """

    def __init__(self, dt_s: float, *, threshold_g: float, pre_s: float, post_s: float,
                 fn_hz, q: float = 10.0, max_event_s: float = 60.0) -> None:
        super().__init__()
        self.fn_hz, self.q, self.dt_s = sdof_filter.check_inputs(fn_hz, q, dt_s)
        self.threshold_g = _validate.positive_scalar("threshold_g", threshold_g)
        for name, val in (("pre_s", pre_s), ("post_s", post_s)):
            try:
                fv = float(val)
            except (TypeError, ValueError) as exc:
                raise InputError(name, val, "must be a number") from exc
            if not np.isfinite(fv) or fv < 0:
                raise InputError(name, val, "must be a finite time >= 0")
        self._n_pre = int(round(float(pre_s) / self.dt_s))
        self._n_post = int(round(float(post_s) / self.dt_s))
        self._max_event_s = _validate.positive_scalar("max_event_s", max_event_s)
        self._n_max = int(round(self._max_event_s / self.dt_s))
        self._buf = np.empty(0)
        self._buf_start = 0  # record index of self._buf[0]
        self._first = -1  # first crossing of the open event, -1 when none is open
        self._last = -1  # last crossing of the open event
        self.events: list[ShockEvent] = []

    def _emit(self, first: int, last: int, n_total: int) -> None:
        i0 = max(0, first - self._n_pre)
        i1 = min(n_total - 1, last + self._n_post)
        seg = self._buf[i0 - self._buf_start:i1 + 1 - self._buf_start]
        if seg.size < 2:
            seg = np.concatenate((seg, np.zeros(2 - seg.size)))
        j = int(np.argmax(np.abs(seg)))
        res = _srs.shock_response_spectrum(seg, self.dt_s, self.fn_hz, self.q,
                                           pseudo_velocity=False)
        self.events.append(ShockEvent(
            start_s=i0 * self.dt_s, end_s=i1 * self.dt_s, first_crossing_s=first * self.dt_s,
            peak_g=float(abs(seg[j])), time_of_peak_s=(i0 + j) * self.dt_s, srs=res))

    def update(self, chunk) -> None:
        """Add the next samples of the channel [g]."""
        g0 = self.n_samples
        x = self._take(chunk)
        if not x.size:
            return
        self._buf = np.concatenate((self._buf, x))
        gap = self._n_pre + self._n_post
        for c in (np.flatnonzero(np.abs(x) >= self.threshold_g) + g0).tolist():
            if self._first >= 0 and c - self._last > gap:
                self._emit(self._first, self._last, self.n_samples)
                self._first = -1
            if self._first < 0:
                self._first = c
            self._last = c
        end = self.n_samples  # samples seen
        if self._first >= 0 and end - 1 - self._last > gap:
            self._emit(self._first, self._last, end)
            self._first = -1
        if self._first >= 0 and (end - self._first) > self._n_max:
            raise InputError("threshold_g", self.threshold_g,
                             f"gives an event longer than max_event_s = {self._max_event_s:g} s "
                             f"(from {self._first * self.dt_s:g} s): raise the threshold")
        keep_from = (max(0, self._first - self._n_pre) if self._first >= 0
                     else max(0, end - self._n_pre))
        if keep_from > self._buf_start:
            self._buf = self._buf[keep_from - self._buf_start:].copy()
            self._buf_start = keep_from

    def result(self) -> list[ShockEvent]:
        """The events in time order."""
        self._finish()
        if self._first >= 0:
            self._emit(self._first, self._last, self.n_samples)
            self._first = -1
        return list(self.events)
