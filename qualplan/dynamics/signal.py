"""PSD of measured acceleration records: Welch's method and the maximax PSD.

- :func:`welch_psd`: averaged modified periodogram (Welch 1967), the same estimate
  as ``scipy.signal.welch`` (window, overlap, ``detrend='constant'``, one-sided,
  ``scaling='density'``), computed in blocks of segments so that memory stays
  bounded for long records.
- :func:`maximax_psd`: the maximum, line by line, of Welch PSDs over short
  stationary windows of a non-stationary record.
- :func:`welch_dof`: equivalent number of independent averages, statistical
  degrees of freedom and normalised random error of a Welch estimate.

Default segment (documented in docs/methods/signal.md): the longest power-of-two
segment that still gives at least 30 segments at the chosen overlap, between 256
samples and 2^16 samples; ``resolution_hz`` or ``segment_s`` override it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.fft
import scipy.signal

from qualplan.dynamics._validate import as_1d_float, positive_scalar
from qualplan.dynamics.errors import InputError

__all__ = [
    "WelchPsd",
    "MaximaxPsd",
    "welch_psd",
    "maximax_psd",
    "welch_dof",
    "default_nperseg",
]

_MIN_AVERAGES = 30
_MIN_NPERSEG = 256
_MAX_NPERSEG = 2 ** 16
_BLOCK_SAMPLES = 2 ** 21  # samples FFT'd per block (about 16 MB of float64)


@dataclass(frozen=True, eq=False)
class WelchPsd:
    """A Welch PSD estimate with its statistics.

    Attributes
    ----------
    freq_hz : ndarray
        Line frequencies 0 ... fs/2 [Hz].
    asd_g2_hz : ndarray
        One-sided ASD [g^2/Hz].
    fs_hz : float
        Sample rate [Hz].
    resolution_hz : float
        Line spacing ``fs / nperseg`` [Hz].
    enbw_hz : float
        Equivalent noise bandwidth of the window [Hz] (1.5 x resolution for Hann).
    nperseg, noverlap, n_segments : int
        Segment length, overlap [samples] and number of segments averaged.
    window : str
        Window name (scipy.signal.get_window).
    n_averages : float
        Equivalent number of independent averages n_d [unitless] (overlap-corrected).
    dof : float
        Statistical degrees of freedom ``2 n_d`` of each line (chi-square).
    random_error : float
        Normalised random error of each line ``1 / sqrt(n_d)`` [unitless].
    grms : float
        ``sqrt(sum(G) df)`` over all lines [g] (Parseval: the record's variance after
        removing each segment's mean, up to the window's leakage).
    duration_s : float
        Record length [s].
    """

    freq_hz: np.ndarray
    asd_g2_hz: np.ndarray
    fs_hz: float
    resolution_hz: float
    enbw_hz: float
    nperseg: int
    noverlap: int
    n_segments: int
    window: str
    n_averages: float
    dof: float
    random_error: float
    grms: float
    duration_s: float

    def band(self, f_lo_hz: float, f_hi_hz: float) -> tuple[np.ndarray, np.ndarray]:
        """Lines with ``f_lo_hz <= f <= f_hi_hz`` [Hz] as ``(freq_hz, asd_g2_hz)``.

        Use it before :func:`qualplan.dynamics.psd.simplify` or ``check_against``, which
        need frequencies > 0 (the DC line is dropped by any ``f_lo_hz > 0``).
        """
        return _band(self.freq_hz, self.asd_g2_hz, f_lo_hz, f_hi_hz)


@dataclass(frozen=True, eq=False)
class MaximaxPsd:
    """Maximax PSD of a non-stationary record.

    Attributes
    ----------
    freq_hz : ndarray
        Line frequencies [Hz].
    asd_g2_hz : ndarray
        Maximum over the windows of each line's Welch ASD [g^2/Hz].
    time_of_max_s : ndarray
        Start time of the window holding each line's maximum [s].
    window_s : float
        Length of each stationary window [s].
    window_step_s : float
        Step between window starts [s].
    n_windows : int
        Number of windows.
    nperseg, noverlap, segments_per_window : int
        Welch segment length and overlap [samples] and segments averaged per window.
    resolution_hz : float
        Line spacing [Hz].
    n_averages, dof, random_error : float
        Statistics of each window's estimate (as :class:`WelchPsd`). The maximum of
        several noisy estimates is biased upward; see docs/methods/signal.md.
    grms_max : float
        Largest g rms of any window [g].
    fs_hz : float
        Sample rate [Hz].
    """

    freq_hz: np.ndarray
    asd_g2_hz: np.ndarray
    time_of_max_s: np.ndarray
    window_s: float
    window_step_s: float
    n_windows: int
    nperseg: int
    noverlap: int
    segments_per_window: int
    resolution_hz: float
    n_averages: float
    dof: float
    random_error: float
    grms_max: float
    fs_hz: float

    def band(self, f_lo_hz: float, f_hi_hz: float) -> tuple[np.ndarray, np.ndarray]:
        """Lines with ``f_lo_hz <= f <= f_hi_hz`` [Hz] as ``(freq_hz, asd_g2_hz)``.

        Use it before :func:`qualplan.dynamics.psd.simplify` or ``check_against``, which
        need frequencies > 0 (the DC line is dropped by any ``f_lo_hz > 0``).
        """
        return _band(self.freq_hz, self.asd_g2_hz, f_lo_hz, f_hi_hz)


def _band(f, a, f_lo_hz, f_hi_hz):
    lo = positive_scalar("f_lo_hz", f_lo_hz)
    hi = positive_scalar("f_hi_hz", f_hi_hz)
    m = (f >= lo) & (f <= hi)
    if m.sum() < 2:
        raise InputError("f_hi_hz", f_hi_hz, f"leaves {int(m.sum())} lines above {lo:g} Hz "
                         "(needs at least 2)")
    return f[m].copy(), a[m].copy()


def default_nperseg(n_samples: int, overlap: float = 0.5) -> int:
    """Default Welch segment length.

    Parameters
    ----------
    n_samples : int
        Record length [samples].
    overlap : float
        Segment overlap [fraction].

    Returns
    -------
    int
        The largest power of two from 256 to 65536 with at least 30 segments at
        `overlap` [samples]; 256 (or the record length, if shorter) when even that
        gives fewer.

    References
    ----------
    Common practice (>= 30 averages: random error <= 0.19); docs/methods/signal.md.
    """
    best = _MIN_NPERSEG
    k = _MIN_NPERSEG
    while k <= _MAX_NPERSEG:
        step = max(1, k - int(round(overlap * k)))
        nseg = (n_samples - k) // step + 1 if n_samples >= k else 0
        if nseg >= _MIN_AVERAGES:
            best = k
        k *= 2
    return min(best, n_samples)


def welch_dof(window, nperseg: int, noverlap: int, n_segments: int):
    """Equivalent averages, degrees of freedom and random error of a Welch estimate.

    Parameters
    ----------
    window : str or tuple or array_like
        Window (scipy.signal.get_window spec) or its samples.
    nperseg, noverlap : int
        Segment length and overlap [samples].
    n_segments : int
        Number of segments averaged.

    Returns
    -------
    n_d : float
        Equivalent number of independent averages [unitless].
    dof : float
        ``2 n_d`` degrees of freedom.
    random_error : float
        ``1/sqrt(n_d)`` [unitless].

    Notes
    -----
    For Gaussian data with a flat spectrum over the window's bandwidth, the variance
    of the averaged estimate relative to its mean square is
    ``(1/K) [1 + 2 sum_{j=1}^{K-1} (1 - j/K) rho(j S)]``, with
    ``rho(s) = (sum_n w_n w_{n+s})^2 / (sum_n w_n^2)^2`` the squared correlation of the
    window with itself shifted by ``s`` samples and S the step (Welch 1967).
    n_d is its inverse: K for non-overlapping segments; ``K / (1 + 2/36)`` = 0.947 K
    for Hann at 50 % overlap and large K (rho = 1/36). The normalised random error
    of a PSD estimate is ``eps_r = 1/sqrt(n_d)`` (Bendat & Piersol, Random Data,
    4th ed., 2010, ch. 8).

    References
    ----------
    Welch, P. D., "The use of fast Fourier transform for the estimation of power
    spectra", IEEE Trans. Audio Electroacoust. AU-15(2), 1967.
    Bendat, J. S. & Piersol, A. G., Random Data, 4th ed., Wiley, 2010.
    """
    w = np.asarray(window, dtype=float) if not isinstance(window, str | tuple) else \
        scipy.signal.get_window(window, nperseg)
    step = nperseg - noverlap
    K = int(n_segments)
    s2 = float(np.dot(w, w)) ** 2
    total = 1.0
    j = 1
    while j < K and j * step < nperseg:
        sh = j * step
        rho = float(np.dot(w[:-sh], w[sh:])) ** 2 / s2
        total += 2.0 * (1.0 - j / K) * rho
        j += 1
    n_d = K / total
    return n_d, 2.0 * n_d, 1.0 / math.sqrt(n_d)


def _setup(accel_g, fs_hz, resolution_hz, segment_s, overlap, window):
    x = as_1d_float("accel_g", accel_g, min_size=2)
    fs = positive_scalar("fs_hz", fs_hz)
    try:
        ov = float(overlap)
    except (TypeError, ValueError) as exc:
        raise InputError("overlap", overlap, "must be a number in [0, 1)") from exc
    if not (0.0 <= ov < 1.0):
        raise InputError("overlap", overlap, "must be in [0, 1) (fraction of a segment)")
    if resolution_hz is not None and segment_s is not None:
        raise InputError("segment_s", segment_s, "give resolution_hz or segment_s, not both")
    if resolution_hz is not None:
        df = positive_scalar("resolution_hz", resolution_hz)
        nperseg = int(round(fs / df))
    elif segment_s is not None:
        nperseg = int(round(positive_scalar("segment_s", segment_s) * fs))
    else:
        nperseg = default_nperseg(x.size, ov)
    if nperseg < 2:
        raise InputError("resolution_hz", resolution_hz, f"gives {nperseg} samples per segment")
    if nperseg > x.size:
        raise InputError(
            "accel_g", f"{x.size} samples ({x.size / fs:g} s)",
            f"is shorter than one Welch segment ({nperseg} samples = {nperseg / fs:g} s)",
        )
    noverlap = int(round(ov * nperseg))
    if noverlap >= nperseg:
        noverlap = nperseg - 1
    try:
        win = scipy.signal.get_window(window, nperseg)
    except (ValueError, TypeError) as exc:
        raise InputError("window", window, f"is not a scipy.signal window ({exc})") from exc
    return x, fs, nperseg, noverlap, win


def _segment_power(x, nperseg, step, win, first, count):
    """One-sided density periodograms of segments first..first+count-1 (g^2/Hz x fs)."""
    idx0 = first * step
    seg = np.lib.stride_tricks.as_strided(
        x[idx0:], shape=(count, nperseg), strides=(x.strides[0] * step, x.strides[0]),
        writeable=False,
    )
    y = seg - seg.mean(axis=1, keepdims=True)
    y *= win
    spec = scipy.fft.rfft(y, axis=1, workers=-1)
    p = spec.real ** 2 + spec.imag ** 2
    return p


def _scale(p_sum, n, nperseg, fs, win):
    """Turn a sum of |FFT|^2 over n segments into a one-sided density."""
    p = p_sum / (n * fs * float(np.dot(win, win)))
    if nperseg % 2:
        p[..., 1:] *= 2.0
    else:
        p[..., 1:-1] *= 2.0
    return p


def welch_psd(accel_g, fs_hz: float, *, resolution_hz: float | None = None,
              segment_s: float | None = None, overlap: float = 0.5,
              window="hann") -> WelchPsd:
    """Welch PSD of an acceleration record, with its degrees of freedom and random error.

    Parameters
    ----------
    accel_g : array_like
        Acceleration samples [g], uniformly sampled, finite.
    fs_hz : float
        Sample rate [Hz] (required: no default).
    resolution_hz : float, optional
        Line spacing [Hz]; ``nperseg = round(fs/resolution_hz)``.
    segment_s : float, optional
        Segment length [s] (alternative to `resolution_hz`).
    overlap : float
        Overlap of consecutive segments [fraction], default 0.5.
    window : str or tuple
        scipy.signal window, default ``"hann"``.

    Returns
    -------
    WelchPsd

    Raises
    ------
    InputError
        NaN/inf samples, a record shorter than one segment, bad overlap or window.

    Notes
    -----
    ``G(f_k) = 2 / (fs sum w^2 K) sum_s |FFT(w (x_s - mean(x_s)))_k|^2`` (one-sided;
    DC and Nyquist lines not doubled); identical to
    ``scipy.signal.welch(x, fs, window, nperseg, noverlap)``. Statistics from
    :func:`welch_dof`.

    References
    ----------
    Welch 1967 (IEEE Trans. Audio Electroacoust. AU-15); Bendat & Piersol, Random
    Data, 4th ed. 2010, ch. 11.
    """
    x, fs, nperseg, noverlap, win = _setup(accel_g, fs_hz, resolution_hz, segment_s,
                                           overlap, window)
    step = nperseg - noverlap
    nseg = (x.size - nperseg) // step + 1
    per_block = max(1, _BLOCK_SAMPLES // nperseg)
    acc = np.zeros(nperseg // 2 + 1)
    for first in range(0, nseg, per_block):
        count = min(per_block, nseg - first)
        acc += _segment_power(x, nperseg, step, win, first, count).sum(axis=0)
    p = _scale(acc, nseg, nperseg, fs, win)
    f = np.fft.rfftfreq(nperseg, 1.0 / fs)
    n_d, dof, err = welch_dof(win, nperseg, noverlap, nseg)
    df = fs / nperseg
    enbw = fs * float(np.dot(win, win)) / float(np.sum(win)) ** 2
    return WelchPsd(
        freq_hz=f, asd_g2_hz=p, fs_hz=fs, resolution_hz=df, enbw_hz=enbw,
        nperseg=nperseg, noverlap=noverlap, n_segments=nseg,
        window=window if isinstance(window, str) else repr(window),
        n_averages=n_d, dof=dof, random_error=err,
        grms=math.sqrt(float(np.sum(p)) * df), duration_s=x.size / fs,
    )


def maximax_psd(accel_g, fs_hz: float, *, window_s: float = 1.0,
                window_overlap: float = 0.5, resolution_hz: float | None = None,
                segment_s: float | None = None, overlap: float = 0.5,
                window="hann") -> MaximaxPsd:
    """Maximax PSD: line-by-line maximum of Welch PSDs over short stationary windows.

    Parameters
    ----------
    accel_g : array_like
        Acceleration samples [g].
    fs_hz : float
        Sample rate [Hz].
    window_s : float
        Length of each (assumed stationary) averaging window [s], default 1 s.
    window_overlap : float
        Overlap of consecutive windows [fraction], default 0.5.
    resolution_hz, segment_s, overlap, window
        Welch settings inside each window (as :func:`welch_psd`); by default the
        segment is chosen by :func:`default_nperseg` for the window length (the longest
        power of two giving at least 30 segments per window, 256 samples at least).

    Returns
    -------
    MaximaxPsd

    Notes
    -----
    Each window's PSD is the Welch average of the segments lying wholly inside it;
    windows start every ``window_s (1 - window_overlap)`` (rounded to whole segment
    steps). The maximax PSD envelopes the time-varying spectrum of a non-stationary
    event (launch, transient); its random error is that of one window.

    References
    ----------
    NASA-HDBK-7005 (2001), Dynamic Environmental Criteria, maximax spectra of
    non-stationary data; Piersol, NASA CR-341 (1965).
    """
    fs = positive_scalar("fs_hz", fs_hz)
    wlen_s = positive_scalar("window_s", window_s)
    try:
        wov = float(window_overlap)
    except (TypeError, ValueError) as exc:
            raise InputError(
            "window_overlap", window_overlap, "must be a number in [0, 1)"
        ) from exc
    if not (0.0 <= wov < 1.0):
        raise InputError("window_overlap", window_overlap, "must be in [0, 1)")
    n_win_samples = int(round(wlen_s * fs))
    if resolution_hz is None and segment_s is None:
        seg = default_nperseg(n_win_samples, float(overlap)) if n_win_samples >= 2 else 2
        segment_s = seg / fs
    x, fs, nperseg, noverlap, win = _setup(accel_g, fs, resolution_hz, segment_s, overlap,
                                           window)
    if n_win_samples < nperseg:
        raise InputError("window_s", window_s,
                         f"is shorter than one Welch segment ({nperseg / fs:g} s)")
    if x.size < n_win_samples:
        raise InputError("accel_g", f"{x.size} samples ({x.size / fs:g} s)",
                         f"is shorter than one maximax window ({wlen_s:g} s)")
    step = nperseg - noverlap
    nseg = (x.size - nperseg) // step + 1
    spw = (n_win_samples - nperseg) // step + 1          # segments per window
    wstep = max(1, int(round(spw * (1.0 - wov))))        # window step in segments
    n_windows = (nseg - spw) // wstep + 1
    starts = np.arange(n_windows) * wstep
    # cumulative sums of the segment periodograms at every window start and end
    marks = np.unique(np.concatenate((starts, starts + spw)))
    nf = nperseg // 2 + 1
    csum_at = np.empty((marks.size, nf))
    running = np.zeros(nf)
    per_block = max(1, _BLOCK_SAMPLES // nperseg)
    mi = 0
    if marks[0] == 0:
        csum_at[0] = 0.0
        mi = 1
    for first in range(0, nseg, per_block):
        count = min(per_block, nseg - first)
        p = _segment_power(x, nperseg, step, win, first, count)
        c = np.cumsum(p, axis=0)
        c += running
        # marks in (first, first + count] -> cumulative sum of segments < mark
        hi = int(np.searchsorted(marks, first + count, side="right"))
        sel = marks[mi:hi]
        if sel.size:
            csum_at[mi:hi] = c[sel - first - 1]
        mi = hi
        running = c[-1].copy()
    pos = np.searchsorted(marks, starts)
    pos_end = np.searchsorted(marks, starts + spw)
    wsum = csum_at[pos_end] - csum_at[pos]
    pw = _scale(wsum, spw, nperseg, fs, win)              # (n_windows, nf)
    k = np.argmax(pw, axis=0)
    pmax = pw[k, np.arange(nf)]
    df = fs / nperseg
    n_d, dof, err = welch_dof(win, nperseg, noverlap, spw)
    return MaximaxPsd(
        freq_hz=np.fft.rfftfreq(nperseg, 1.0 / fs), asd_g2_hz=pmax,
        time_of_max_s=starts[k] * step / fs, window_s=(nperseg + (spw - 1) * step) / fs,
        window_step_s=wstep * step / fs, n_windows=int(n_windows), nperseg=nperseg,
        noverlap=noverlap, segments_per_window=int(spw), resolution_hz=df,
        n_averages=n_d, dof=dof, random_error=err,
        grms_max=math.sqrt(float(np.max(pw.sum(axis=1))) * df), fs_hz=fs,
    )
