"""Synthesis of a shaker-realisable shock whose SRS matches a target SRS profile.

Method: a sum of *wavelets* (half-sine modulated sines with an odd number of
half-cycles), the waveform-synthesis family of Yang & Saffell (1972) used by
shaker shock controllers and described in IEST-RP-DTE032::

    w_i(t) = A_i sin(2 pi f_i (t - tau_i) / N_i) sin(2 pi f_i (t - tau_i)),
             tau_i <= t <= tau_i + N_i / (2 f_i),   N_i odd >= 3

One wavelet per natural frequency of the analysis grid. Because N_i is odd,
every wavelet starts and ends at rest with zero net velocity AND zero net
displacement, so the sum does too: the record can be played by a shaker
without drift (closed form; shown in docs/methods/shock-synthesis.md).

The frequencies are fixed; the half-cycle counts N_i and delays tau_i are drawn
from a seeded random generator; the amplitudes A_i are iterated until the
maximax SRS lies within the tolerance at every grid frequency. The iteration
is ours (see the method note): a damped Gauss-Newton step on the signed peak
responses, with the Jacobian evaluated at the current peak instants, instead
of the classic per-frequency ratio correction A_i <- A_i SRS_target/SRS_now,
which stalls at 2-4 dB on 1/12-octave grids where neighbouring wavelets
interact. A trial that the Gauss-Newton step leaves outside the tolerance is
finished by minimax steps (sequential linear programming on the amplitudes,
docs/methods/shock-synthesis.md section 12): least squares spreads the error,
the tolerance bounds its largest value.

``method="free_samples"``: no components; the samples themselves are the
variables of one linear program per set of peak instants (the response is
linear in the samples of a piecewise-linear record), solved by HiGHS, with the
peak instants moved between programs (section 13 of the method note).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from qualplan.dynamics import _loglog, _validate, sdof_filter
from qualplan.dynamics import srs as _srs
from qualplan.dynamics.errors import InputError
from qualplan.dynamics.units import G0_M_S2

try:
    import numba

    _HAVE_NUMBA = True
except ImportError:  # pragma: no cover
    numba = None
    _HAVE_NUMBA = False

__all__ = ["Wavelets", "ShockSynthesis", "synthesize_shock", "wavelet", "integrate_accel",
           "srs_ratio_bound", "srs_gain_damped_sine"]


# --------------------------------------------------------------------------
# Waveforms and integration


def wavelet(t_s, freq_hz: float, half_cycles: int, amplitude_g: float = 1.0,
            delay_s: float = 0.0) -> np.ndarray:
    """One wavelet: a sine modulated by a half-sine window, zero outside it.

    Parameters
    ----------
    t_s : array_like
        Times [s].
    freq_hz : float
        Carrier frequency f [Hz].
    half_cycles : int
        Number N of carrier half-cycles, odd >= 3 [unitless].
    amplitude_g : float, optional
        Amplitude A [g].
    delay_s : float, optional
        Start time tau [s].

    Returns
    -------
    numpy.ndarray
        ``A sin(2 pi f (t - tau)/N) sin(2 pi f (t - tau))`` on
        ``tau <= t <= tau + N/(2f)``, 0 elsewhere [g].

    Notes
    -----
    Net velocity ``int w dt = 0`` for every integer N; net displacement
    ``int (T - t) w dt = 0`` for odd N (T = N/(2f)).

    References
    ----------
    R. C. Yang, H. R. Saffell, "Development of a waveform synthesis technique -
    a supplement to response spectrum as a definition of shock environment",
    Shock and Vibration Bulletin 42, 1972 [from memory]; IEST-RP-DTE032.
    """
    f = _validate.positive_scalar("freq_hz", freq_hz)
    n = _check_half_cycles(half_cycles)
    t = np.asarray(t_s, dtype=float) - float(delay_s)
    inside = (t >= 0.0) & (t <= n / (2.0 * f))
    w = amplitude_g * np.sin(2 * np.pi * f * t / n) * np.sin(2 * np.pi * f * t)
    return np.where(inside, w, 0.0)


def _check_half_cycles(n) -> int:
    try:
        k = int(n)
    except (TypeError, ValueError) as exc:
        raise InputError("half_cycles", n, "must be an odd integer >= 3") from exc
    if k != n or k < 3 or k % 2 == 0:
        raise InputError("half_cycles", n, "must be an odd integer >= 3")
    return k


def integrate_accel(accel_g, dt_s) -> tuple[np.ndarray, np.ndarray]:
    """Velocity and displacement of a sampled acceleration, linear between samples.

    Parameters
    ----------
    accel_g : array_like
        Acceleration, uniformly sampled [g].
    dt_s : float
        Sample step [s].

    Returns
    -------
    velocity_m_s : numpy.ndarray
        Velocity, starting at 0 [m/s].
    displacement_m : numpy.ndarray
        Displacement, starting at 0 [m].

    Notes
    -----
    Exact for piecewise-linear acceleration (the same assumption as the
    ramp-invariant SRS filter): ``v_(k+1) = v_k + (a_k + a_(k+1)) dt/2``,
    ``d_(k+1) = d_k + v_k dt + (2 a_k + a_(k+1)) dt^2/6``.

    References
    ----------
    Closed form of the integrals of a linear function (trapezoid rule and its
    second integral).
    """
    a = _validate.as_1d_float("accel_g", accel_g) * G0_M_S2
    dt = _validate.positive_scalar("dt_s", dt_s)
    v = np.concatenate(([0.0], np.cumsum(0.5 * (a[:-1] + a[1:]) * dt)))
    d = np.concatenate(([0.0], np.cumsum(v[:-1] * dt + (2 * a[:-1] + a[1:]) * dt * dt / 6.0)))
    return v, d


# --------------------------------------------------------------------------
# What an SRS can do: the largest ratio between two natural frequencies


def srs_ratio_bound(f_from_hz, f_to_hz, q: float) -> np.ndarray:
    """Largest ratio SRS(f_from) / SRS(f_to) that any base acceleration can give.

    Parameters
    ----------
    f_from_hz, f_to_hz : array_like
        Natural frequencies [Hz] (broadcast together), each > 0.
    q : float
        Amplification Q = 1/(2 zeta) of both oscillators [unitless].

    Returns
    -------
    numpy.ndarray
        ``||g||_1`` [unitless], the bound of ``max|y_from| / max|y_to|`` (maximax
        absolute-acceleration SRS, record and free decay) over every input.

    Notes
    -----
    With ``H_w(s) = (2 zeta w s + w^2) / (s^2 + 2 zeta w s + w^2)`` the
    absolute-acceleration transfer function of an oscillator of natural
    frequency w, ``H_from = G H_to`` with ``G = H_from / H_to``: a stable,
    proper transfer function (its poles are those of H_from and the zero
    ``-w_to / (2 zeta)`` of H_to). The response of the first oscillator is
    therefore the response of the second filtered by G, so
    ``max|y_from| <= ||g||_1 max|y_to|`` for every input, with g the impulse
    response of G (Young's inequality for convolution). ``||g||_1`` is the
    direct term ``w_from / w_to`` plus the integral of the modulus of the sum
    of exponentials from the partial fractions of G (trapezoid rule, 64 points
    per period over 30 decay times, 4000 over the fast pole; 1e-3 accurate).
    For Q = 10: 3.4 (f_from/f_to = 0.9), 6.5 (0.75), 10.3 (0.5), 12.4
    (0.25), tending to the L1 norm of the oscillator's own impulse response
    (about 4Q/pi) as f_from/f_to tends to 0. An SRS target that falls
    faster than this between two frequencies cannot be met by any record.

    References
    ----------
    Convolution bound ``||g * y||_inf <= ||g||_1 ||y||_inf`` (Young's
    inequality; C. A. Desoer, M. Vidyasagar, Feedback Systems: Input-Output
    Properties, 1975, ch. 2: the L-infinity gain of a stable LTI system is the
    L1 norm of its impulse response) [from memory]; SDOF transfer functions:
    Harris' Shock and Vibration Handbook, ch. 8. The use as a test of an SRS
    target is our own.
    """
    fa, fb = np.broadcast_arrays(np.asarray(f_from_hz, dtype=float),
                                 np.asarray(f_to_hz, dtype=float))
    if np.any(~(fa > 0)) or np.any(~(fb > 0)):
        raise InputError("f_from_hz/f_to_hz", "<= 0", "natural frequencies must be > 0")
    qv = _validate.check_q(q)
    ratio = (fa / fb).ravel()
    out = np.empty(ratio.size)
    cache: dict[float, float] = {}
    for i, r in enumerate(ratio):
        key = round(math.log2(r), 9)
        if key not in cache:
            cache[key] = _ratio_bound(2.0 ** key, qv)
        out[i] = cache[key]
    return out.reshape(fa.shape)


def _ratio_bound(r: float, q: float) -> float:
    """||g||_1 of G = H_r / H_1 (time in units of 1/w_to)."""
    if abs(r - 1.0) < 1e-9:
        return 1.0
    from scipy import signal

    z = 1.0 / (2.0 * q)
    num = np.polymul([2 * z * r, r * r], [1.0, 2 * z, 1.0])
    den = np.polymul([1.0, 2 * z * r, r * r], [2 * z, 1.0])
    res, poles, direct = signal.residue(num, den)
    d = float(np.real(direct[0])) if len(direct) else 0.0
    slow = float(np.min(-poles.real))
    fast = float(np.max(-poles.real))
    wd = float(np.max(np.abs(poles.imag)))
    t_end = 30.0 / slow
    step = min(2 * np.pi / (64 * wd), t_end / 2000)
    t = np.union1d(np.linspace(0.0, 40.0 / fast, 4000), np.arange(0.0, t_end, step))
    g = np.real(np.exp(np.outer(t, poles)) @ res)
    return abs(d) + float(np.trapezoid(np.abs(g), t))


def _check_reachable(fn, tgt, q, dt, tol):
    """Refuse a target that no record can meet within the tolerance.

    For every pair of grid frequencies with ``tgt_i > tgt_j``: any record has
    ``SRS_i <= B_ij SRS_j`` (:func:`srs_ratio_bound`), and the SRS read at the
    samples is at most ``1 - cos(pi f_j dt)`` below the continuous one. So the
    errors obey ``e_j - e_i >= D_ij`` with ``D_ij = 20 log10(tgt_i / (B_ij tgt_j))``
    less that sampling margin, and the worst error of any record is at least
    ``D_ij / 2``.
    """
    i, j = np.nonzero(tgt[:, None] > tgt[None, :] * 10 ** (2 * tol / 20))
    if i.size == 0:
        return None
    bound = srs_ratio_bound(fn[i], fn[j], q)
    slack = -20 * np.log10(np.cos(np.pi * np.minimum(fn[j] * dt, 0.49)))
    d = 20 * np.log10(tgt[i] / (bound * tgt[j])) - slack
    k = int(np.argmax(d))
    if d[k] / 2 > tol:
        a, b = int(i[k]), int(j[k])
        raise InputError(
            "target", f"{tgt[a]:.4g} g at {fn[a]:.4g} Hz, {tgt[b]:.4g} g at {fn[b]:.4g} Hz",
            f"cannot be met within +/-{tol:g} dB by any base acceleration: at Q = {q:g} the SRS"
            f" at {fn[a]:.4g} Hz is at most {bound[k]:.3g} times the SRS at {fn[b]:.4g} Hz"
            f" (the target asks {tgt[a] / tgt[b]:.3g}), so the worst error of any record is at"
            f" least {d[k] / 2:.2f} dB; make the target fall less steeply there",
        )
    if d[k] <= 0:
        return None
    return (float(d[k] / 2), float(fn[i[k]]), float(fn[j[k]]))


# --------------------------------------------------------------------------
# Kernels: signed peak response and its sensitivity to each wavelet

if _HAVE_NUMBA:

    @numba.njit(parallel=True, cache=True)
    def _peaks(x, b, a, n_extra, val, idx):  # pragma: no cover - compiled
        n = x.shape[0]
        for j in numba.prange(b.shape[0]):
            b0, b1, b2 = b[j, 0], b[j, 1], b[j, 2]
            a1, a2 = a[j, 1], a[j, 2]
            x1 = 0.0
            x2 = 0.0
            y1 = 0.0
            y2 = 0.0
            best = -1.0
            bi = 0
            sg = 0.0
            for k in range(n + n_extra[j]):
                x0 = x[k] if k < n else 0.0
                y0 = b0 * x0 + b1 * x1 + b2 * x2 - a1 * y1 - a2 * y2
                ay = abs(y0)
                if ay > best:
                    best = ay
                    bi = k
                    sg = y0
                x2 = x1
                x1 = x0
                y2 = y1
                y1 = y0
            val[j] = sg
            idx[j] = bi

    @numba.njit(parallel=True, cache=True)
    def _jacobian(b, a, idx, span, k0, ln, off, w, jac):  # pragma: no cover - compiled
        """jac[j, i] = response of filter j at its peak sample idx[j] to wavelet i.

        The impulse response h_j is used over its first span[j] samples only
        (it has decayed below 1e-6 of its start by then): the Jacobian serves
        a Newton step, convergence is judged on the exact SRS.
        """
        nw = k0.shape[0]
        for j in numba.prange(b.shape[0]):
            ks = idx[j]
            nh = min(ks + 1, span[j])
            kmin = ks - nh + 1
            h = np.zeros(nh)
            b0, b1, b2 = b[j, 0], b[j, 1], b[j, 2]
            a1, a2 = a[j, 1], a[j, 2]
            y1 = 0.0
            y2 = 0.0
            for m in range(nh):
                y0 = -a1 * y1 - a2 * y2
                if m == 0:
                    y0 += b0
                elif m == 1:
                    y0 += b1
                elif m == 2:
                    y0 += b2
                h[m] = y0
                y2 = y1
                y1 = y0
            for i in range(nw):
                s = 0.0
                q_lo = max(0, kmin - k0[i])
                q_hi = min(ln[i], ks - k0[i] + 1)
                for q in range(q_lo, q_hi):
                    s += h[ks - k0[i] - q] * w[off[i] + q]
                jac[j, i] = s


def _peaks_py(x, b, a, n_extra, val, idx):  # pragma: no cover - numba fallback
    from scipy.signal import lfilter

    for j in range(b.shape[0]):
        y = lfilter(b[j], a[j], np.concatenate([x, np.zeros(int(n_extra[j]))]))
        k = int(np.argmax(np.abs(y)))
        val[j], idx[j] = y[k], k


def _jacobian_py(b, a, idx, span, k0, ln, off, w, jac):  # pragma: no cover - numba fallback
    from scipy.signal import lfilter

    for j in range(b.shape[0]):
        ks = int(idx[j])
        imp = np.zeros(ks + 1)
        imp[0] = 1.0
        h = lfilter(b[j], a[j], imp)
        for i in range(k0.size):
            q = np.arange(ln[i])
            k = k0[i] + q
            ok = k <= ks
            jac[j, i] = np.dot(h[ks - k[ok]], w[off[i] + q[ok]])


# --------------------------------------------------------------------------
# Results


@dataclass(frozen=True)
class Wavelets:
    """The wavelets of a synthesis (one per natural frequency of the grid).

    Attributes
    ----------
    freq_hz : numpy.ndarray
        Carrier frequencies [Hz].
    amplitude_g : numpy.ndarray
        Signed amplitudes A_i [g].
    half_cycles : numpy.ndarray
        Odd numbers of half-cycles N_i [unitless].
    delay_s : numpy.ndarray
        Start times tau_i (on the sample grid) [s].
    damping : numpy.ndarray or None
        Damping ratio zeta_i of each decaying sinusoid (``method="damped_sines"``),
        None for wavelets [unitless].
    """

    freq_hz: np.ndarray
    amplitude_g: np.ndarray
    half_cycles: np.ndarray
    delay_s: np.ndarray
    damping: np.ndarray | None = None


@dataclass(frozen=True)
class ShockSynthesis:
    """A synthesised shock and how well its SRS matches the target.

    Attributes
    ----------
    dt_s : float
        Sample step [s].
    accel_g : numpy.ndarray
        Acceleration time history, starting and ending at 0 [g].
    velocity_m_s : numpy.ndarray
        Its velocity (linear acceleration between samples) [m/s].
    displacement_m : numpy.ndarray
        Its displacement [m].
    wavelets : Wavelets
        The components.
    freq_hz : numpy.ndarray
        Natural frequencies of the check grid [Hz].
    q : float
        Amplification Q of the SRS [unitless].
    target_g : numpy.ndarray
        Target SRS at the grid [g].
    srs_g : numpy.ndarray
        Maximax SRS of the synthesised record [g].
    positive_g, negative_g : numpy.ndarray
        Its positive and negative SRS [g] (for symmetry checks).
    error_db : numpy.ndarray
        ``20 log10(srs_g / target_g)`` [dB].
    max_error_db : float
        Largest |error_db| [dB].
    tolerance_db : float
        Requested tolerance (+/-) [dB].
    converged : bool
        True when ``max_error_db <= tolerance_db``.
    iterations : int
        Amplitude iterations used by the retained trial [unitless].
    trial : int
        Index of the retained random design (0-based) [unitless].
    peak_accel_g : float
        max |accel| [g].
    peak_velocity_m_s : float
        max |velocity| [m/s].
    peak_displacement_m : float
        max |displacement| [m].
    final_velocity_m_s : float
        Velocity at the end of the record [m/s] (0 to rounding and sampling).
    final_displacement_m : float
        Displacement at the end of the record [m].
    duration_s : float
        Span of the record, first to last sample [s].
    seed : int or None
        Seed used (None when a Generator was passed).
    warnings : tuple of str
        Non-fatal issues (e.g. not converged).
    method : str
        "wavelets" or "damped_sines".
    """

    dt_s: float
    accel_g: np.ndarray
    velocity_m_s: np.ndarray
    displacement_m: np.ndarray
    wavelets: Wavelets
    freq_hz: np.ndarray
    q: float
    target_g: np.ndarray
    srs_g: np.ndarray
    positive_g: np.ndarray
    negative_g: np.ndarray
    error_db: np.ndarray
    max_error_db: float
    tolerance_db: float
    converged: bool
    iterations: int
    trial: int
    peak_accel_g: float
    peak_velocity_m_s: float
    peak_displacement_m: float
    final_velocity_m_s: float
    final_displacement_m: float
    duration_s: float
    seed: int | None
    warnings: tuple[str, ...]
    method: str = "wavelets"


# --------------------------------------------------------------------------
# Synthesis


def _target_values(target, freq_hz):
    if hasattr(target, "freq_hz") and hasattr(target, "accel_g"):
        tf, ta = target.freq_hz, target.accel_g
    else:
        try:
            tf, ta = target
        except (TypeError, ValueError) as exc:
            raise InputError(
                "target", type(target).__name__, "must be an SrsProfile or (freq_hz, accel_g)"
            ) from exc
    tf, ta = _loglog.check_profile(tf, ta, "target.freq_hz", "target.accel_g")
    if freq_hz is None:
        fn = _srs.octave_grid(tf[0], tf[-1], 12, anchor_hz=tf[0])
    else:
        fn = _validate.as_1d_float("freq_hz", freq_hz)
        _validate.all_positive("freq_hz", fn)
        _validate.strictly_increasing("freq_hz", fn)
    out = (fn < tf[0] * (1 - 1e-12)) | (fn > tf[-1] * (1 + 1e-12))
    if out.any():
        i = int(np.argmax(out))
        raise InputError(
            f"freq_hz[{i}]", float(fn[i]),
            f"must lie inside the target band {tf[0]:g} to {tf[-1]:g} Hz",
        )
    fn = np.clip(fn, tf[0], tf[-1])
    return fn, _loglog.interp(tf, ta, fn)


def _end_state(s: np.ndarray, dt: float) -> np.ndarray:
    """Velocity and displacement after a short record s followed by one zero sample."""
    x = np.concatenate((s, [0.0]))
    v = np.concatenate(([0.0], np.cumsum(0.5 * (x[:-1] + x[1:]) * dt)))
    d = np.sum(v[:-1] * dt + (2 * x[:-1] + x[1:]) * dt * dt / 6.0)
    return np.array([v[-1], d])


def _zero_drift(shape: np.ndarray, window: np.ndarray, tt: np.ndarray, dt: float) -> np.ndarray:
    """Sampled wavelet corrected to exactly zero end velocity and displacement.

    The continuous odd-N wavelet has both zero; its samples leave a residue of
    the order of the sampling error (~1e-5 of the peaks at 20 points per
    cycle). Adding ``window (c1 + c2 t)``, which keeps the wavelet smooth and
    zero at both ends, with (c1, c2) from a 2x2 solve removes it to rounding.
    """
    basis = np.column_stack([_end_state(window, dt), _end_state(window * tt, dt)])
    try:
        c = np.linalg.solve(basis, -_end_state(shape, dt))
    except np.linalg.LinAlgError:  # pragma: no cover - degenerate (very few samples)
        return shape
    return shape + window * (c[0] + c[1] * tt)


def _design(fn, dt, duration, max_delay, n_lo, n_hi, rng, placement="random"):
    """Random half-cycle counts and sample-aligned delays (one trial).

    ``placement="sweep"``: the delays grow with frequency so that each component
    starts a share ``k/(n-1)`` of the way through the room its length leaves in
    the record (the components follow one another instead of piling up at the
    start, which lowers the record's peak acceleration)."""
    nf = fn.size
    room = duration - n_lo / (2.0 * fn)  # time left for the delay
    u = rng.uniform(0.0, 1.0, nf)
    delay = np.floor(u * np.clip(np.minimum(max_delay, room), 0.0, None) / dt) * dt
    n_max = np.floor(2.0 * fn * (duration - delay)).astype(np.int64)
    n_max = np.where(n_max % 2 == 0, n_max - 1, n_max)
    n_top = np.maximum(np.minimum(n_max, n_hi), n_lo)
    n_choices = (n_top - n_lo) // 2 + 1
    half = n_lo + 2 * np.floor(rng.uniform(0.0, 1.0, nf) * n_choices).astype(np.int64)
    sign = np.where(rng.uniform(0.0, 1.0, nf) < 0.5, -1.0, 1.0)
    if placement == "sweep":
        span = half / (2.0 * fn)
        share = np.linspace(0.0, 1.0, nf) if nf > 1 else np.zeros(1)
        delay = np.floor(share * np.maximum(duration - span, 0.0) / dt) * dt
    return half, delay, sign


def synthesize_shock(
    target,
    freq_hz=None,
    *,
    q: float = 10.0,
    tolerance_db: float = 1.5,
    dt_s: float | None = None,
    duration_s: float | None = None,
    half_cycles: tuple[int, int] | None = None,
    max_delay_s: float | None = None,
    seed: int | np.random.Generator = 0,
    n_trials: int = 4,
    max_iterations: int = 60,
    method: str = "wavelets",
    stroke_m: float | None = None,
    placement: str = "auto",
) -> ShockSynthesis:
    """Synthesise a shock time history whose maximax SRS matches a target SRS.

    Parameters
    ----------
    target : SrsProfile or (freq_hz, accel_g)
        Target SRS as log-log breakpoints [Hz, g].
    freq_hz : array_like, optional
        Natural frequencies at which the SRS must match [Hz], inside the
        target band; one wavelet per frequency. Default: 1/12-octave grid from
        the first target breakpoint (``octave_grid(f_lo, f_hi, 12, anchor_hz=f_lo)``).
    q : float, optional
        Amplification Q of the SRS [unitless]. Default 10.
    tolerance_db : float, optional
        Required match, +/- at every grid frequency [dB]. Default 1.5.
    dt_s : float, optional
        Sample step [s]. Default ``1/(20 f_max)`` (peak-picking error of the
        SRS below 1.2 %).
    duration_s : float, optional
        Longest record wanted [s]; every wavelet fits inside it. Default
        ``4 / f_min`` (room for 7 half-cycles of the lowest frequency).
        Must be at least ``1.5 / f_min`` (3 half-cycles).
    half_cycles : (int, int), optional
        Range of odd half-cycle counts drawn for each wavelet [unitless].
        Fewer half-cycles: shorter, broader-band wavelets; more: narrower.
        Default (7, 21) for wavelets, (15, 45) for damped sines (whose
        duration is N half-cycles, decayed to 1e-3 over it), (31, 91) for
        damped sines on a target that falls at its upper end (decayed to 1/30
        over them); lowered automatically where the duration is short.
    max_delay_s : float, optional
        Largest wavelet start time [s]. Default ``duration_s / 10``.
    seed : int or numpy.random.Generator, optional
        Seed of the random design (half-cycles, delays, signs) [unitless]. The result is
        deterministic for a given seed. Default 0.
    n_trials : int, optional
        Random designs tried in turn until one converges [unitless]. Default 4.
    max_iterations : int, optional
        Amplitude iterations per trial [unitless]. Default 60. A trial also
        stops when its best error has not improved for 30 iterations.
    method : {"wavelets", "damped_sines", "free_samples"}, optional
        Components [unitless]: half-sine-windowed sines (default), or decaying
        sinusoids ``exp(-zeta w t) sin(w t)`` with ``zeta = ln(1000) / (pi N)``
        (decayed to 1e-3 after N half-cycles, where the sine is at zero;
        ``ln(30) / (pi N)`` for a target that falls at its upper end, whose
        plateau needs more response per g of peak: :func:`srs_gain_damped_sine`),
        each with compensating terms ``sin(pi t/T_i) (c1 + c2 t)`` that make
        its final velocity and displacement zero (the compensated decaying
        sinusoids of Smallwood & Nord 1974, compensation of our own form).
        "free_samples": no components, every sample is a variable of a linear
        program per set of peak instants (instants from one Gauss-Newton wavelet
        trial; every response sample of the record and its free decay bounded by
        the target, peak |accel| by the target at the highest grid frequency,
        final velocity and displacement zero, displacement within ``stroke_m``
        when given; docs/methods/shock-synthesis.md section 13). Reaches targets
        the components do not (-20 dB within an octave) at a cost of tens of CPU
        seconds for ~50 frequencies x 1500 samples; ``n_trials`` is not used.
    placement : {"auto", "random", "sweep"}, optional
        Start times of the components [unitless]: drawn at random within
        ``max_delay_s`` ("random"), or "sweep": increasing with frequency across
        the whole duration (lower peak acceleration; better for targets that
        fall at high frequency, docs/methods/shock-synthesis.md section 9).
        Default "auto": "sweep" for a target that falls at its upper end
        (value at the highest grid frequency below the target's maximum),
        "random" otherwise.
    stroke_m : float, optional
        Largest |displacement| the shaker allows from its rest position [m].
        A result whose peak displacement exceeds it is refused
        (:class:`InputError` naming ``stroke_m``).

    Returns
    -------
    ShockSynthesis
        Record [g, m/s, m], wavelets, achieved and target SRS [g], errors
        [dB], peaks, final velocity and displacement, duration [s].

    Raises
    ------
    InputError
        Bad target or grid, tolerance <= 0, a grid frequency above a tenth of
        the sample rate, a duration too short for the lowest frequency, an
        unknown method, a result whose displacement exceeds ``stroke_m``, a
        target that no base acceleration can meet within the tolerance
        (field ``target``; the message gives the two frequencies, the bound and
        the least worst error in dB).

    Notes
    -----
    Amplitude iteration (damped Gauss-Newton on the signed peaks): with
    ``p_j = y_j(t_j*)`` the signed peak response of oscillator j at its peak
    instant and ``J_ji = d y_j(t_j*) / d A_i`` (the response of oscillator j to
    wavelet i at that instant, exact because the response is linear in the
    amplitudes), solve in the least-squares sense
    ``J A' = sign(p) SRS_target`` with a Tikhonov term ``lambda (A' - A)``,
    ``lambda = 0.01 ||J||_2`` (normal equations
    ``(J^T J + lambda^2 I) A' = J^T sign(p) SRS_target + lambda^2 A``), and step
    ``A <- A + 0.7 (A' - A)``; repeat until
    ``|20 log10(SRS / SRS_target)| <= tolerance`` at every grid frequency.
    A trial that stops outside the tolerance (stall or ``max_iterations``) is
    finished by at most ``max_iterations`` minimax steps: the linear program
    ``min u`` over (A, u) with ``s_j y_j(k_j*) >= SRS_target_j`` at each peak
    instant and ``|y_j(k)| <= u SRS_target_j`` at the largest local extrema of
    every oscillator met so far (exact rows: the response is linear in A),
    inside a trust region on A; the record is then scaled by the common
    factor that centres the dB errors (the SRS is homogeneous in the record).
    The trial whose record converges first is kept; if none converges, the
    best one is returned with ``converged=False`` and a warning.

    Targets that fall at high frequency: the SRS at high natural frequencies
    tends to the record's peak acceleration, so for such a target the record's
    peak is held to the target at the highest grid frequency, ``cap``: every
    sample with ``|x_k| > cap`` adds the row ``d x_k / d A_i`` (the wavelets'
    values at that sample) with the right-hand side ``sign(x_k) cap`` to the
    least-squares system (a one-sided constraint, active only while exceeded;
    docs/methods/shock-synthesis.md section 10). For such a target every row
    is divided by its own target value (``SRS_target_j``, ``cap``), so the
    step weighs relative errors as the dB tolerance does.

    Before iterating, every pair of grid frequencies is checked against
    :func:`srs_ratio_bound`: where the target falls faster than any record's
    SRS can (``SRS_i <= B_ij SRS_j`` for every input), the worst error of any
    record is at least ``20 log10(target_i / (B_ij target_j)) / 2``; a target
    for which that exceeds the tolerance is refused (section 11).

    References
    ----------
    R. C. Yang, H. R. Saffell, "Development of a waveform synthesis technique -
    a supplement to response spectrum as a definition of shock environment",
    Shock and Vibration Bulletin 42, 1972 [from memory].
    IEST-RP-DTE032, Pyroshock Testing Techniques (wavelet synthesis on shakers).
    D. O. Smallwood, A. R. Nord, "Matching shock spectra with sums of decaying
    sinusoids compensated for velocity effects", Shock and Vibration Bulletin 44,
    1974 [from memory].
    D. O. Smallwood 1981 and ISO 18431-4:2007 (the SRS used for the check).
    """
    if placement not in ("auto", "random", "sweep"):
        raise InputError("placement", placement, "must be 'auto', 'random' or 'sweep'")
    if method not in SYNTHESIS_METHODS:
        raise InputError("method", method, f"must be one of {', '.join(SYNTHESIS_METHODS)}")
    stroke = None if stroke_m is None else _validate.positive_scalar("stroke_m", stroke_m)
    fn, tgt = _target_values(target, freq_hz)
    falling = bool(tgt[-1] < tgt.max())
    light = method == "damped_sines" and falling  # lighter damping (section 12)
    decay_ratio = DECAY_RATIO_FALLING if light else DECAY_RATIO
    if half_cycles is None:
        half_cycles = ((7, 21) if method in ("wavelets", "free_samples")
                       else (31, 91) if light else (15, 45))
    qv = _validate.check_q(q)
    tol = _validate.positive_scalar("tolerance_db", tolerance_db)
    dt = (1.0 / (20.0 * fn.max())) if dt_s is None else _validate.positive_scalar("dt_s", dt_s)
    if fn.max() > 0.1 / dt:
        raise InputError(
            "dt_s", dt, f"sample rate must be >= 10 x the highest frequency {fn.max():g} Hz"
        )
    dur = 4.0 / fn.min() if duration_s is None else _validate.positive_scalar(
        "duration_s", duration_s)
    if dur < 1.5 / fn.min():
        raise InputError(
            "duration_s", duration_s,
            f"must be >= 1.5/f_min = {1.5 / fn.min():g} s (3 half-cycles of {fn.min():g} Hz)",
        )
    max_delay = 0.1 * dur if max_delay_s is None else float(max_delay_s)
    if not np.isfinite(max_delay) or max_delay < 0:
        raise InputError("max_delay_s", max_delay_s, "must be a finite number >= 0")
    try:
        n_lo, n_hi = (int(v) for v in half_cycles)
    except (TypeError, ValueError) as exc:
        raise InputError("half_cycles", half_cycles, "must be two odd integers >= 3") from exc
    _check_half_cycles(n_lo)
    _check_half_cycles(n_hi)
    if n_hi < n_lo:
        raise InputError("half_cycles", half_cycles, "must be (low, high) with low <= high")
    # Lower the smallest count where the duration is too short for it.
    fit = int(math.floor(2.0 * fn.min() * dur))
    fit = fit if fit % 2 == 1 else fit - 1
    n_lo = max(3, min(n_lo, fit))
    n_hi = max(n_hi, n_lo)
    trials = int(n_trials)
    if trials < 1:
        raise InputError("n_trials", n_trials, "must be >= 1")
    iters = int(max_iterations)
    if iters < 1:
        raise InputError("max_iterations", max_iterations, "must be >= 1")
    if placement == "auto":
        placement = "sweep" if falling else "random"
    cap = float(tgt[-1]) if falling else None
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    seed_out = None if isinstance(seed, np.random.Generator) else int(seed)

    floor = _check_reachable(fn, tgt, qv, dt, tol)
    b, a = sdof_filter.coefficients(fn, qv, dt, output="abs_accel")
    n_extra = _srs._residual_samples(fn, qv, dt)
    best = None
    if method == "free_samples":
        # peak instants and signs from one Gauss-Newton wavelet trial, then the linear
        # programs on the free samples (section 13)
        run = _iterate(fn, tgt, dt, dur, max_delay, n_lo, n_hi, rng, b, a, n_extra, tol, iters,
                       "wavelets", placement, cap, decay_ratio)
        n = int(round(dur / dt)) + 1
        x0 = np.zeros(n)
        m = min(n, run["x"].size)
        x0[:m] = run["x"][:m]
        out = _free_samples(fn, tgt, qv, dt, n, b, a, n_extra, tol, x0, float(tgt[-1]), stroke,
                            FREE_SAMPLES_MAX_LPS, _peaks if _HAVE_NUMBA else _peaks_py)
        best = dict(out, trial=0)
        trials = 0
    for trial in range(trials):
        run = _iterate(fn, tgt, dt, dur, max_delay, n_lo, n_hi, rng, b, a, n_extra, tol, iters,
                       method, placement, cap, decay_ratio)
        if best is None or run["max_err"] < best["max_err"]:
            best = dict(run, trial=trial)
        if run["max_err"] <= tol:
            break
    if best["max_err"] > tol and method != "free_samples":  # minimax steps on the best trial
        best = dict(best["finish"](), trial=best["trial"])
    out = _result(best, fn, tgt, qv, dt, tol, seed_out, method, floor)
    if stroke is not None and out.peak_displacement_m > stroke:
        raise InputError(
            "stroke_m", stroke_m,
            f"the synthesised shock needs a peak displacement of {out.peak_displacement_m:.4g} m"
            f" (peak velocity {out.peak_velocity_m_s:.3g} m/s, peak acceleration"
            f" {out.peak_accel_g:.3g} g), more than the stroke; raise the lowest frequency,"
            f" shorten the duration or use more half-cycles at low frequency",
        )
    return out


#: Component families of :func:`synthesize_shock`.
SYNTHESIS_METHODS = ("wavelets", "damped_sines", "free_samples")

#: A trial stops when its best error has not improved for this many iterations.
_PATIENCE = 30


def _largest_eigenvalue(m: np.ndarray, iterations: int = 30) -> float:
    """Largest eigenvalue of a symmetric positive semi-definite matrix (power iteration).

    Accurate to a few per cent, which is all the regularisation weight needs.
    """
    v = np.ones(m.shape[0]) / math.sqrt(m.shape[0])
    lam = 0.0
    for _ in range(iterations):
        w = m @ v
        lam = float(np.linalg.norm(w))
        if lam == 0.0:
            return 0.0
        v = w / lam
    return lam


#: Decay of a damped sine over its N half-cycles: to 1e-3 (default), to 1/30 for a target
#: that falls at its upper end (lighter damping, more SRS per g of peak: section 12).
DECAY_RATIO = 1000.0
DECAY_RATIO_FALLING = 30.0


def _damping(half: np.ndarray, decay: float = DECAY_RATIO) -> np.ndarray:
    """Damping ratio zeta that decays a sinusoid by ``decay`` over N half-cycles [unitless].

    ``exp(-zeta w t)`` at ``t = N/(2 f)`` is ``exp(-zeta pi N)``, so
    ``zeta = ln(decay) / (pi N)`` (closed form).
    """
    return math.log(decay) / (np.pi * half)


def srs_gain_damped_sine(zeta_input, q: float):
    """Largest response of an oscillator to a decaying sine at its natural frequency.

    Parameters
    ----------
    zeta_input : array_like
        Damping ratio of the input ``exp(-zeta_c w t) sin(w t)``, > 0 [unitless].
    q : float
        Amplification Q = 1/(2 zeta) of the oscillator [unitless].

    Returns
    -------
    numpy.ndarray
        ``Q r^(r/(1-r))`` with ``r = zeta_c / zeta`` (``Q/e`` at r = 1) [g per g of
        input amplitude]: the peak absolute-acceleration response over the
        input's amplitude, for a lightly damped oscillator.

    Notes
    -----
    Slowly varying envelope of the resonant response (first-order averaging):
    ``E' = (w/2) A(t) - zeta w E`` with ``A(t) = A exp(-zeta_c w t)`` gives
    ``E(t) = A (exp(-zeta_c w t) - exp(-zeta w t)) / (2 (zeta - zeta_c))``, whose
    maximum is the expression above; a steady sine (r -> 0) gives Q. Accurate to
    a few per cent for Q >= 5 (tested against the ramp-invariant filter).

    References
    ----------
    Envelope (averaging) solution of a lightly damped oscillator under slowly
    modulated resonant forcing: Harris' Shock and Vibration Handbook, ch. 8
    (resonant build-up) [from memory]; the closed form above is our derivation.
    """
    qv = _validate.check_q(q)
    r = np.asarray(zeta_input, dtype=float) * 2.0 * qv
    if np.any(~(r > 0)):
        raise InputError("zeta_input", "<= 0", "input damping ratios must be > 0")
    near = np.abs(r - 1.0) < 1e-9
    rr = np.where(near, 0.5, r)
    return qv * np.where(near, math.exp(-1.0), rr ** (rr / (1.0 - rr)))


def _peak_rows(x, cap, k0, ln, off, w, nf):
    """Rows ``d x_k / d A_i`` and right-hand sides ``sign(x_k) cap`` for ``|x_k| > cap``.

    At most ``nf`` rows (the largest exceedances), so the system stays small.
    """
    over = np.flatnonzero(np.abs(x) > cap)
    if over.size == 0:
        return None, None
    ks = over[np.argsort(-np.abs(x[over]))[:nf]]
    rows = np.zeros((ks.size, nf))
    for r, k in enumerate(ks):
        q = k - k0
        ok = (q >= 0) & (q < ln)
        rows[r, ok] = w[off[ok] + q[ok]]
    return rows, np.sign(x[ks]) * cap


def _iterate(fn, tgt, dt, dur, max_delay, n_lo, n_hi, rng, b, a, n_extra, tol, iters,
             method="wavelets", placement="random", cap=None, decay_ratio=DECAY_RATIO):
    half, delay, sign = _design(fn, dt, dur, max_delay, n_lo, n_hi, rng, placement)
    nf = fn.size
    k0 = np.rint(delay / dt).astype(np.int64)
    span = half / (2.0 * fn)
    k1 = k0 + np.floor(span / dt + 1e-9).astype(np.int64)
    n = int(k1.max()) + 2  # at least one trailing zero
    ln = (k1 - k0 + 1).astype(np.int64)
    off = np.concatenate(([0], np.cumsum(ln)[:-1])).astype(np.int64)
    shapes = []
    for i in range(nf):
        tt = np.arange(ln[i]) * dt
        window = np.sin(2 * np.pi * fn[i] * tt / half[i])
        if method == "wavelets":
            shape = window * np.sin(2 * np.pi * fn[i] * tt)
        else:  # decaying sinusoid, compensated by the same window (c1 + c2 t)
            wi = 2 * np.pi * fn[i]
            shape = np.exp(-_damping(half[i], decay_ratio) * wi * tt) * np.sin(wi * tt)
        shapes.append(_zero_drift(shape, window, tt, dt))
    w = np.concatenate(shapes)
    # index of the wavelet owning each stacked sample, to build x with one bincount
    pos = np.concatenate([k0[i] + np.arange(ln[i]) for i in range(nf)])
    owner = np.repeat(np.arange(nf), ln)

    def build(amp):
        return np.bincount(pos, weights=w * amp[owner], minlength=n)

    amp = sign * tgt / np.maximum(1.0, half / 2.0)
    decay = -np.log(a[:, 2]) / 2.0  # a2 = E^2 = exp(-2 zeta wn dt): zeta wn dt per sample
    span = (np.ceil(np.log(1e6) / decay) + 3).astype(np.int64)
    val = np.empty(nf)
    idx = np.empty(nf, dtype=np.int64)
    jac = np.empty((nf, nf))
    peaks = _peaks if _HAVE_NUMBA else _peaks_py
    jacobian = _jacobian if _HAVE_NUMBA else _jacobian_py
    best = None
    eye = np.eye(nf)
    for it in range(1, iters + 1):
        x = build(amp)
        peaks(x, b, a, n_extra, val, idx)
        err = np.max(np.abs(20.0 * np.log10(np.abs(val) / tgt)))
        if best is None or err < best["max_err"]:
            best = dict(max_err=err, amp=amp.copy(), it=it)
        if err <= tol or it - best["it"] >= _PATIENCE:
            break
        jacobian(b, a, idx, span, k0, ln, off, w, jac)
        rows, rhs = jac, np.sign(val) * tgt
        if cap is not None:  # hold the record's peak to the target's top-end value
            extra, extra_rhs = _peak_rows(x, cap, k0, ln, off, w, nf)
            # rows scaled by their own target (relative, like the dB tolerance): unscaled,
            # the plateau rows outweigh the low top end and the cap rows by the
            # target's fall, and the top end stays high
            rows, rhs = jac / tgt[:, None], np.sign(val)
            if extra is not None:
                rows = np.vstack([rows, extra / cap])
                rhs = np.concatenate([rhs, extra_rhs / cap])
        # Tikhonov-regularised least squares via the normal equations (a small
        # SPD solve; an SVD-based lstsq is 10x slower on a loaded 2-core machine)
        jtj = rows.T @ rows
        lam2 = 1e-4 * _largest_eigenvalue(jtj)
        new = np.linalg.solve(jtj + lam2 * eye, rows.T @ rhs + lam2 * amp)
        amp = amp + 0.7 * (new - amp)
    best.update(half=half, delay=k0 * dt, x=build(best["amp"]), decay_ratio=decay_ratio)

    def finish():  # the minimax steps of section 12, from this trial's best amplitudes
        out = _minimax(best, build, n, tgt, b, a, n_extra, span, k0, ln, off, w, tol, iters,
                       peaks, jacobian)
        return dict(out, x=build(out["amp"]))

    best["finish"] = finish
    return best


#: Local extrema of each oscillator's response added as upper rows per minimax step.
_CUTS_PER_STEP = 3
#: Sets of upper rows kept (two per minimax step; older ones are dropped).
_CUTS_KEPT = 20
#: The minimax steps stop after _MINIMAX_PATIENCE steps none of which lowered the worst
#: error by _MINIMAX_GAIN_DB [dB].
_MINIMAX_GAIN_DB = 0.02
_MINIMAX_PATIENCE = 8


def _top_extrema(y: np.ndarray, k: int) -> np.ndarray:
    """Indices of the k largest local maxima of |y| in each row, shape (k, rows)."""
    m = np.abs(y)
    peak = np.zeros_like(m)
    inner = (m[:, 1:-1] >= m[:, :-2]) & (m[:, 1:-1] >= m[:, 2:])
    peak[:, 1:-1] = np.where(inner, m[:, 1:-1], 0.0)
    peak[:, 0] = m[:, 0]
    kk = min(k, m.shape[1])
    top = np.argpartition(-peak, kk - 1, axis=1)[:, :kk]
    return np.ascontiguousarray(top.T.astype(np.int64))


def _minimax(start, build, n, tgt, b, a, n_extra, span, k0, ln, off, w, tol, iters,
             peaks, jacobian, cuts_per_step=3):
    """Sequential linear programming on the amplitudes: minimise the worst dB error.

    Started from the Gauss-Newton result when that stops outside the tolerance
    (docs/methods/shock-synthesis.md section 12). The SRS scales with the
    amplitudes (``SRS(c x) = |c| SRS(x)``), so the worst error after the best
    common scale is half the dB spread, ``10 log10(max r_j / min r_j)`` with
    ``r_j = SRS_j / SRS_target_j``. Each step solves the linear program

        minimise u  over (A, u)
        s_j y_j(k_j*; A) >= SRS_target_j           (peak instant k_j*, sign s_j)
        |y_j(k; A)| <= u SRS_target_j               (stored instants k of every j)
        |A_i - A0_i| <= rho max(|A0_i|, 0.1 max|A0|)

    where ``y_j(k; A) = sum_i A_i (h_j * w_i)(k)`` is exact (the response is
    linear in the amplitudes): every lower row is met by the new record (its
    SRS is at least its value at one instant), every upper row holds at its
    instant; instants not yet stored can exceed, so each step stores the
    largest local extrema of every oscillator (a cutting-plane exchange). The
    trust radius rho grows by 1.5 after a step that lowers the true worst error
    and shrinks by 0.7 otherwise (the step is then not taken, but the extrema
    of the rejected record are stored). Units: amplitudes [g], errors [dB].

    References
    ----------
    Cutting planes: J. E. Kelley, "The cutting-plane method for solving convex
    programs", J. SIAM 8, 1960 [from memory]; minimax (Chebyshev) fitting as a
    linear program and trust regions on sequential linear programs: common
    practice. The use on SRS synthesis is our own.
    """
    from scipy.optimize import linprog

    nf = tgt.size
    nc = k0.size
    extra = int(n_extra.max())
    alive = np.arange(n + extra)[None, :] < (n + n_extra)[:, None]
    val = np.empty(nf)
    idx = np.empty(nf, dtype=np.int64)
    jac = np.empty((nf, nc))

    def evaluate(amp):
        x = build(amp)
        peaks(x, b, a, n_extra, val, idx)
        r = np.abs(val) / tgt
        return x, val.copy(), idx.copy(), float(r.min()), float(r.max())

    def cuts(x):  # upper rows at the largest local extrema of every oscillator
        y = sdof_filter.run_filters(np.concatenate((x, np.zeros(extra))), b, a)
        y[~alive] = 0.0
        rows = []
        for inst in _top_extrema(y, cuts_per_step):
            jacobian(b, a, inst, span, k0, ln, off, w, jac)
            rows.append(jac / tgt[:, None])
        pool.append(np.vstack(rows))
        del pool[:-_CUTS_KEPT]

    amp = start["amp"].copy()
    x, v, ix, lo, hi = evaluate(amp)
    err = 10.0 * math.log10(hi / lo)
    pool: list[np.ndarray] = []
    cuts(x)
    rho = 0.3
    it_used = last_gain = 0
    cost = np.zeros(nc + 1)
    cost[-1] = 1.0
    for it in range(1, iters + 1):
        it_used = it
        jacobian(b, a, ix, span, k0, ln, off, w, jac)
        lower = -(np.sign(v) / tgt)[:, None] * jac
        upper = np.vstack(pool)
        a0 = amp / lo  # lowest ratio 1: the lower rows hold with equality or more
        width = rho * np.maximum(np.abs(a0), 0.1 * np.abs(a0).max())
        a_ub = np.block([
            [lower, np.zeros((nf, 1))],
            [upper, -np.ones((upper.shape[0], 1))],
            [-upper, -np.ones((upper.shape[0], 1))],
        ])
        b_ub = np.concatenate((-np.ones(nf), np.zeros(2 * upper.shape[0])))
        bounds = np.vstack((np.column_stack((a0 - width, a0 + width)), [[1.0, np.inf]]))
        res = linprog(cost, A_ub=a_ub, b_ub=b_ub, bounds=bounds, method="highs")
        if res.status != 0:  # pragma: no cover - the start point is always feasible
            break
        trial = res.x[:nc]
        xt, vt, it_ix, lo_t, hi_t = evaluate(trial)
        err_t = 10.0 * math.log10(hi_t / lo_t)
        cuts(xt)  # the instants this step did not see
        if err_t < err - 1e-9:
            if err_t < err - _MINIMAX_GAIN_DB:
                last_gain = it
            amp, x, v, ix, lo, hi, err = trial, xt, vt, it_ix, lo_t, hi_t, err_t
            rho = min(1.0, 1.5 * rho)
        else:
            rho *= 0.7
        if err <= tol or rho < 1e-3 or it - last_gain >= _MINIMAX_PATIENCE:
            break
    if err >= start["max_err"]:
        return start
    g = 1.0 / math.sqrt(lo * hi)  # the common scale that centres the errors in dB
    return dict(start, max_err=err, amp=amp * g, it=start["it"] + it_used)



# --------------------------------------------------------------------------
# Free samples: one linear program per set of peak instants (issue 16, fourth pass)

#: Peak-instant updates (linear programs) of ``method="free_samples"`` at most.
FREE_SAMPLES_MAX_LPS = 8
#: The updates stop when the program's optimum tau rises by less than this share.
_FREE_SAMPLES_GAIN = 2e-3
#: HiGHS options of the free-sample programs (the result is judged on the exact SRS).
_FREE_SAMPLES_LP_OPTIONS: dict = {}


def _end_weights(n: int, dt: float) -> tuple[np.ndarray, np.ndarray]:
    """Final velocity and displacement of a piecewise-linear record as ``w . x`` [s, s^2].

    ``v(T) = int a dt`` and ``d(T) = int (T - t) a(t) dt`` (closed form for a
    record linear between samples: the hat function of sample k integrates to
    dt, and against ``T - t`` to ``(T - t_k) dt``; the two end samples carry
    half-hats: ``T dt/2 - dt^2/6`` at the start, ``dt^2/6`` at the end). Multiply by
    g0 for SI units. Equal to :func:`integrate_accel` to rounding (tested).
    """
    t_end = (n - 1) * dt
    tk = np.arange(n) * dt
    wv = np.full(n, dt)
    wv[0] = wv[-1] = dt / 2.0
    wd = (t_end - tk) * dt
    wd[0] = t_end * dt / 2.0 - dt * dt / 6.0
    wd[-1] = dt * dt / 6.0
    return wv, wd


def _free_samples_lp(fn, tgt, b, a, n_extra, n, dt, cap, stroke_g):
    """Build the fixed part of the linear program of :func:`_free_samples`.

    Variables: the samples x_k [g], the response y_j,k of every oscillator at
    every sample of the record and of its free decay [g] (one equality row per
    step of its ramp-invariant recursion, so ``|y_j,k| <= SRS_target_j`` is a
    simple bound at every instant: no instant is left out), optionally the
    velocity and displacement [g dt, g dt^2] (recursions of
    :func:`integrate_accel`, rows only when a stroke is given), and tau.
    """
    import scipy.sparse as sps

    nf = fn.size
    ln = n + n_extra
    off = np.concatenate(([n], n + np.cumsum(ln))).astype(np.int64)
    n_var = int(off[-1])
    if stroke_g is not None:
        iv, idd = n_var, n_var + n
        n_var += 2 * n
    itau = n_var
    n_var += 1
    rows, cols, vals = [], [], []
    r = 0
    for j in range(nf):
        k = np.arange(ln[j])
        base = r + k
        rows.append(base)
        cols.append(off[j] + k)
        vals.append(np.ones(ln[j]))
        for lag in (1, 2):
            m = k >= lag
            rows.append(base[m])
            cols.append(off[j] + k[m] - lag)
            vals.append(np.full(int(m.sum()), a[j, lag]))
        for lag in range(3):
            kk = k - lag
            m = (kk >= 0) & (kk < n)
            rows.append(base[m])
            cols.append(kk[m])
            vals.append(np.full(int(m.sum()), -b[j, lag]))
        r += int(ln[j])
    wv, wd = _end_weights(n, dt)
    for w in (wv / dt, wd / (n * dt * dt)):  # final velocity and displacement = 0
        rows.append(np.full(n, r))
        cols.append(np.arange(n))
        vals.append(w)
        r += 1
    lo = np.full(n_var, -np.inf)
    hi = np.full(n_var, np.inf)
    lo[:n], hi[:n] = -cap, cap
    lo[[0, n - 1]] = hi[[0, n - 1]] = 0.0  # starts and ends at 0
    for j in range(nf):
        lo[off[j]:off[j + 1]], hi[off[j]:off[j + 1]] = -tgt[j], tgt[j]
    if stroke_g is not None:
        # u_(k+1) = u_k + (x_k + x_(k+1))/2, s_(k+1) = s_k + u_k + (2 x_k + x_(k+1))/6 with
        # u = v/(g0 dt), s = d/(g0 dt^2); u_0 = s_0 = 0; |s_k| <= stroke / (g0 dt^2)
        k = np.arange(1, n)
        for var, extra in ((iv, None), (idd, iv)):
            base = r + k - 1
            rows += [base, base]
            cols += [var + k, var + k - 1]
            vals += [np.ones(n - 1), -np.ones(n - 1)]
            wa, wb = (0.5, 0.5) if extra is None else (1.0 / 3.0, 1.0 / 6.0)
            rows += [base, base]
            cols += [k - 1, k]
            vals += [np.full(n - 1, -wa), np.full(n - 1, -wb)]
            if extra is not None:
                rows.append(base)
                cols.append(extra + k - 1)
                vals.append(-np.ones(n - 1))
            r += n - 1
        lo[iv] = hi[iv] = lo[idd] = hi[idd] = 0.0
        lo[idd:idd + n], hi[idd:idd + n] = -stroke_g, stroke_g
        lo[idd] = hi[idd] = 0.0
    lo[itau], hi[itau] = 0.0, 1.0
    a_eq = sps.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                          shape=(r, n_var))
    return a_eq, lo, hi, off, itau


def _free_samples(fn, tgt, q, dt, n, b, a, n_extra, tol, start_x, cap, stroke_m, max_lps,
                  peaks):
    """Synthesis from free samples: a linear program per set of peak instants.

    The maximax response of oscillator j is linear in the samples x of a
    piecewise-linear record (ramp-invariant filter). With a peak instant k_j and a
    sign s_j fixed for every grid oscillator, the program

        maximise tau  over (x, y, tau)
        y_j = ramp-invariant recursion of x        (equality rows, record + free decay)
        s_j y_j(k_j) >= tau SRS_target_j           (the peak reaches tau times the target)
        |y_j(k)| <= SRS_target_j                   (every j, every instant k)
        |x_k| <= cap,  x_0 = x_(n-1) = 0,  final velocity = final displacement = 0
        [|displacement_k| <= stroke 10^(-tol/20)]  (when a stroke is given)

    is convex; solved by HiGHS (interior point). Then every SRS_j lies in
    [tau, 1] SRS_target_j, so the record scaled by ``1/sqrt(tau)`` (the SRS is
    homogeneous) is within ``+/- 10 log10(1/tau)`` dB: the tolerance is met when
    ``tau >= 10^(-tol/10)``. Each k_j then moves to where y_j now peaks (the old
    record stays feasible, so tau never falls) and the program is solved again,
    up to ``max_lps`` times. Units: x [g], SRS [g], stroke [m].
    """
    import scipy.sparse as sps
    from scipy.optimize import linprog

    nf = fn.size
    stroke_g = None
    if stroke_m is not None:  # in units of g0 dt^2, with room for the final scale
        stroke_g = stroke_m * 10 ** (-tol / 20.0) / (G0_M_S2 * dt * dt)
    a_eq, lo, hi, off, itau = _free_samples_lp(fn, tgt, b, a, n_extra, n, dt, cap, stroke_g)
    cost = np.zeros(a_eq.shape[1])
    cost[itau] = -1.0
    val = np.empty(nf)
    idx = np.empty(nf, dtype=np.int64)
    peaks(start_x, b, a, n_extra, val, idx)
    kj, sj = np.minimum(idx, n + n_extra - 1), np.sign(val)
    best = None
    tau_old = 0.0
    used = 0
    for _ in range(max_lps):
        used += 1
        a_ub = sps.csr_matrix((np.concatenate((-sj, tgt)),
                               (np.tile(np.arange(nf), 2),
                                np.concatenate((off[:-1] + kj, np.full(nf, itau))))),
                              shape=(nf, a_eq.shape[1]))
        res = linprog(cost, A_ub=a_ub, b_ub=np.zeros(nf), A_eq=a_eq,
                      b_eq=np.zeros(a_eq.shape[0]), bounds=np.column_stack((lo, hi)),
                      method="highs-ipm", options=dict(_FREE_SAMPLES_LP_OPTIONS))
        if res.status != 0:  # pragma: no cover - x = 0, tau = 0 is always feasible
            break
        x = res.x[:n].copy()
        tau = float(res.x[itau])
        peaks(x, b, a, n_extra, val, idx)
        r = np.abs(val) / tgt
        err = 10.0 * math.log10(r.max() / r.min())
        if best is None or err < best["max_err"]:
            best = dict(max_err=err, x=x / math.sqrt(r.min() * r.max()), it=used, tau=tau)
        if err <= tol or tau < tau_old * (1 + _FREE_SAMPLES_GAIN):
            break
        tau_old = tau
        kj, sj = np.minimum(idx, n + n_extra - 1), np.sign(val)
    # the interior-point solution meets the end rows to ~1e-10: remove that residue
    # exactly (least-norm correction over the inner samples, ~1e-12 relative)
    x = best["x"]
    wv, wd = _end_weights(n, dt)
    m = np.vstack((wv / dt, wd / (n * dt * dt)))[:, 1:-1]
    x[1:-1] -= m.T @ np.linalg.solve(m @ m.T, m @ x[1:-1])
    best["x"] = x
    return best


def _components(run, fn, method):
    if method == "free_samples":  # no components: every sample is a variable
        none = np.zeros(0)
        return Wavelets(freq_hz=none, amplitude_g=none, half_cycles=np.zeros(0, np.int64),
                        delay_s=none)
    return Wavelets(freq_hz=fn.copy(), amplitude_g=run["amp"], half_cycles=run["half"],
                    delay_s=run["delay"],
                    damping=None if method == "wavelets"
                    else _damping(run["half"], run["decay_ratio"]))


def _result(run, fn, tgt, q, dt, tol, seed, method="wavelets", floor=None):
    x = run["x"]
    res = _srs.shock_response_spectrum(x, dt, fn, q, pseudo_velocity=False)
    v, d = integrate_accel(x, dt)
    err = 20.0 * np.log10(res.maximax_g / tgt)
    max_err = float(np.abs(err).max())
    warn = []
    if max_err > tol:
        worst = int(np.argmax(np.abs(err)))
        peak = float(np.abs(x).max())
        hint = "try another seed, more trials, a longer duration or other half-cycles"
        if err[worst] > 0 and res.maximax_g[worst] <= 1.1 * peak:
            hint = (
                f"the SRS at {fn[worst]:g} Hz is held up by the record's peak acceleration"
                f" ({peak:.3g} g; an SRS tends to the peak input at high natural"
                f" frequencies), so a target that falls there is hard to reach; {hint}"
            )
        if floor is not None:
            hint += (
                f"; between {floor[1]:.4g} and {floor[2]:.4g} Hz the target falls so fast"
                f" that no record can miss it by less than {floor[0]:.2f} dB"
                f" (srs_ratio_bound), so little room is left"
            )
        warn.append(
            f"not converged: the SRS misses the target by {err[worst]:+.2f} dB at"
            f" {fn[worst]:g} Hz (tolerance +/-{tol:g} dB); {hint}"
        )
    return ShockSynthesis(
        dt_s=dt,
        accel_g=x,
        velocity_m_s=v,
        displacement_m=d,
        wavelets=_components(run, fn, method),
        freq_hz=fn,
        q=q,
        target_g=tgt,
        srs_g=res.maximax_g,
        positive_g=res.positive_g,
        negative_g=res.negative_g,
        error_db=err,
        max_error_db=max_err,
        tolerance_db=tol,
        converged=max_err <= tol,
        iterations=int(run["it"]),
        trial=int(run["trial"]),
        peak_accel_g=float(np.abs(x).max()),
        peak_velocity_m_s=float(np.abs(v).max()),
        peak_displacement_m=float(np.abs(d).max()),
        final_velocity_m_s=float(v[-1]),
        final_displacement_m=float(d[-1]),
        duration_s=(x.size - 1) * dt,
        seed=seed,
        warnings=tuple(warn),
        method=method,
    )
