"""Single-degree-of-freedom (SDOF) oscillator in the frequency domain.

Base-excited oscillator z'' + 2 zeta wn z' + wn^2 z = -y'' (z = relative
displacement, y'' = base acceleration), Q = 1/(2 zeta). Transfer functions,
Miles' equation, and the exact response rms and spectral moments of the
response to a base-acceleration PSD.

Three responses are offered (``output``):

- ``"pseudo_accel"``: wn^2 z in g (the FDS/ERS convention of qualplan),
  |H|^2 = 1 / ((1 - r^2)^2 + (r/Q)^2), r = f / fn;
- ``"abs_accel"``: absolute acceleration of the mass in g,
  |H|^2 = (1 + (r/Q)^2) / ((1 - r^2)^2 + (r/Q)^2);
- ``"rel_disp"``: relative displacement z in m, |H|^2 = (g0 / wn^2)^2 / ((1 - r^2)^2 + (r/Q)^2).

References
----------
.. [1] J. W. Miles, "On structural fatigue under random loading", J. Aeronautical
   Sciences 21(11), 1954.
.. [2] Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez), 2010,
   ch. 2 (SDOF transmissibility) and the chapter on random vibration.
.. [3] C. Lalanne, Mechanical Vibration and Shock Analysis, vol. 3 "Random
   Vibration", ISTE/Wiley, 2009 (spectral moments of the response).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Literal

import numpy as np

from qualplan.dynamics import _validate as v
from qualplan.dynamics.errors import AccuracyWarning, InputError
from qualplan.dynamics.psd import check_psd
from qualplan.dynamics.units import G0_M_S2

__all__ = [
    "Output",
    "ResponseMoments",
    "transmissibility",
    "pseudo_accel_gain",
    "rel_disp_transfer",
    "miles_grms",
    "miles_rel_disp_rms_m",
    "response_moments",
    "moment_sensitivities",
    "response_rms",
]

Output = Literal["pseudo_accel", "abs_accel", "rel_disp"]

#: Resonance nodes per natural frequency in the quadrature (Lorentzian mapping).
_N_RES = 320
#: Log-spaced background nodes per octave of the PSD band.
_N_PER_OCT = 96


def _denominator(r: np.ndarray, q: float) -> np.ndarray:
    return (1.0 - r * r) ** 2 + (r / q) ** 2


def transmissibility(freq_hz, fn_hz: float, q: float) -> np.ndarray:
    """Absolute-acceleration transmissibility |H_a| of a base-excited SDOF.

    Parameters
    ----------
    freq_hz : array_like
        Excitation frequencies. [Hz]
    fn_hz : float
        Natural frequency. [Hz]
    q : float
        Amplification factor Q = 1/(2 zeta), > 0.5. [unitless]

    Returns
    -------
    numpy.ndarray
        |H_a| = sqrt((1 + (r/Q)^2) / ((1 - r^2)^2 + (r/Q)^2)), r = f/fn. [g/g]
    """
    fn_hz = v.positive_scalar("fn_hz", fn_hz)
    q = v.check_q(q)
    r = np.asarray(freq_hz, dtype=float) / fn_hz
    return np.sqrt((1.0 + (r / q) ** 2) / _denominator(r, q))


def pseudo_accel_gain(freq_hz, fn_hz: float, q: float) -> np.ndarray:
    """Gain |H_pa| from base acceleration to pseudo-acceleration wn^2 z.

    Parameters
    ----------
    freq_hz : array_like
        Excitation frequencies. [Hz]
    fn_hz : float
        Natural frequency. [Hz]
    q : float
        Amplification factor, > 0.5. [unitless]

    Returns
    -------
    numpy.ndarray
        |H_pa| = 1 / sqrt((1 - r^2)^2 + (r/Q)^2); equals Q at r = 1. [g/g]
    """
    fn_hz = v.positive_scalar("fn_hz", fn_hz)
    q = v.check_q(q)
    r = np.asarray(freq_hz, dtype=float) / fn_hz
    return 1.0 / np.sqrt(_denominator(r, q))


def rel_disp_transfer(freq_hz, fn_hz: float, q: float) -> np.ndarray:
    """Complex transfer function from base acceleration (g) to relative displacement (m).

    Parameters
    ----------
    freq_hz : array_like
        Excitation frequencies. [Hz]
    fn_hz : float
        Natural frequency. [Hz]
    q : float
        Amplification factor, > 0.5. [unitless]

    Returns
    -------
    numpy.ndarray of complex
        H_z(f) = -g0 / (wn^2 - w^2 + j w wn / Q). [m/g]
    """
    fn_hz = v.positive_scalar("fn_hz", fn_hz)
    q = v.check_q(q)
    w = 2.0 * np.pi * np.asarray(freq_hz, dtype=float)
    wn = 2.0 * np.pi * fn_hz
    return -G0_M_S2 / (wn * wn - w * w + 1j * w * wn / q)


def miles_grms(fn_hz, q: float, asd_g2_hz) -> np.ndarray:
    """Miles' equation: response g rms of an SDOF under white base acceleration.

    Parameters
    ----------
    fn_hz : array_like
        Natural frequency. [Hz]
    q : float
        Amplification factor. [unitless]
    asd_g2_hz : array_like
        Input ASD at fn. [g^2/Hz]

    Returns
    -------
    numpy.ndarray
        sqrt((pi/2) fn Q G(fn)). [g rms]

    Notes
    -----
    Miles keeps only the resonant term: it is the exact rms of the
    pseudo-acceleration under an infinite white band, and lower than the exact
    absolute acceleration by sqrt(1 + 1/Q^2).

    References
    ----------
    .. [1] Miles 1954, J. Aeronautical Sciences 21(11).
    """
    q = v.check_q(q)
    return np.sqrt(0.5 * np.pi * np.asarray(fn_hz, float) * q * np.asarray(asd_g2_hz, float))


def miles_rel_disp_rms_m(fn_hz, q: float, asd_g2_hz) -> np.ndarray:
    """Relative displacement rms by Miles' form: sqrt(Q G g0^2 / (32 pi^3 fn^3)) [m]."""
    fn = np.asarray(fn_hz, float)
    return miles_grms(fn, q, asd_g2_hz) * G0_M_S2 / (2.0 * np.pi * fn) ** 2


@dataclass(frozen=True)
class ResponseMoments:
    """Spectral moments of an SDOF response, one value per natural frequency.

    Attributes
    ----------
    fn_hz : numpy.ndarray
        Natural frequencies. [Hz]
    m0, m1, m2, m4 : numpy.ndarray
        m_k = integral of G_resp(f) f^k df. [u^2 Hz^k], u = g (accelerations) or m.
    output : str
        Which response: "pseudo_accel", "abs_accel" or "rel_disp".
    """

    fn_hz: np.ndarray
    m0: np.ndarray
    m1: np.ndarray
    m2: np.ndarray
    m4: np.ndarray
    output: str

    @property
    def rms(self) -> np.ndarray:
        """Response rms sqrt(m0). [g or m]"""
        return np.sqrt(self.m0)

    @property
    def zero_up_rate_hz(self) -> np.ndarray:
        """Rate of zero up-crossings n0+ = sqrt(m2/m0) (Rice). [Hz]"""
        return np.sqrt(self.m2 / self.m0)

    @property
    def peak_rate_hz(self) -> np.ndarray:
        """Rate of maxima np = sqrt(m4/m2) (Rice). [Hz]"""
        return np.sqrt(self.m4 / self.m2)

    @property
    def irregularity(self) -> np.ndarray:
        """Irregularity factor alpha2 = m2 / sqrt(m0 m4) = n0+/np (1 = narrow band). [unitless]"""
        return self.m2 / np.sqrt(self.m0 * self.m4)


def _check_psd(freq_hz, asd_g2_hz) -> tuple[np.ndarray, np.ndarray]:
    return check_psd(freq_hz, asd_g2_hz)


def _check_fn(fn_hz) -> np.ndarray:
    fn = v.as_1d_float("fn_hz", fn_hz)
    v.all_positive("fn_hz", fn)
    return fn


def warn_outside_band(fn: np.ndarray, f: np.ndarray, stacklevel: int = 3) -> None:
    """Warn (AccuracyWarning) when natural frequencies `fn` [Hz] lie outside the band of
    the PSD frequencies `f` [Hz]; `stacklevel` points the warning at the caller's caller."""
    out = (fn < f[0]) | (fn > f[-1])
    if out.any():
        warnings.warn(
            f"{int(out.sum())} natural frequencies lie outside the PSD band "
            f"[{f[0]:g}, {f[-1]:g}] Hz (e.g. fn = {fn[out][0]:g} Hz): their response is "
            "off-resonance only (quasi-static below the band, mass-line above it) and "
            "the narrow-band statistics are approximate there",
            AccuracyWarning,
            stacklevel=stacklevel,
        )


def quadrature_nodes(f_lo: float, f_hi: float, fn: np.ndarray, q: float, *, fixed=None,
                     n_res: int = _N_RES, n_per_oct: int = _N_PER_OCT) -> np.ndarray:
    """Integration nodes per natural frequency, shape (n_fn, n_nodes), sorted per row.

    Parameters
    ----------
    f_lo, f_hi : float
        Integration band. [Hz]
    fn : numpy.ndarray
        Natural frequencies. [Hz]
    q : float
        Amplification factor. [unitless]
    fixed : array_like, optional
        Frequencies that must be nodes (PSD breakpoints, band edges). [Hz]
    n_res : int
        Resonance nodes per fn.
    n_per_oct : int
        Background log-spaced nodes per octave.

    Returns
    -------
    numpy.ndarray, shape (n_fn, n_nodes)
        Nodes. [Hz]

    Notes
    -----
    The nodes are the union of `fixed`, a log grid of `n_per_oct` points per
    octave across the band (kept only where `fixed` is sparser), and `n_res`
    points f = fn (1 + tan(theta) / (2 Q)) with theta uniform in (-pi/2, pi/2),
    which map the resonance peak (a Lorentzian in f) to a flat integrand in theta.
    Nodes falling outside [f_lo, f_hi] are clipped to the edges (zero-width
    intervals, harmless).
    """
    n_oct = max(math.log2(f_hi / f_lo), 1e-12)
    bg = np.geomspace(f_lo, f_hi, max(int(math.ceil(n_oct * n_per_oct)) + 1, 2))
    if fixed is None:
        common = bg
    else:
        fx = np.unique(np.asarray(fixed, float))
        if fx.size >= 2:
            # background nodes are only needed inside fixed intervals wider than their step
            j = np.clip(np.searchsorted(fx, bg, side="right") - 1, 0, fx.size - 2)
            wide = fx[j + 1] / fx[j] > 2.0 ** (1.0 / n_per_oct)
            outside = (bg < fx[0]) | (bg > fx[-1])
            bg = bg[wide | outside]
        common = np.union1d(bg, fx)
    theta = np.linspace(-0.5 * np.pi, 0.5 * np.pi, n_res + 2)[1:-1]
    res = fn[:, None] * (1.0 + np.tan(theta)[None, :] / (2.0 * q))
    res = np.clip(res, f_lo, f_hi)
    nodes = np.concatenate([np.broadcast_to(common, (fn.size, common.size)), res], axis=1)
    nodes.sort(axis=1)
    return nodes


def response_moments(freq_hz, asd_g2_hz, fn_hz, q: float, *, output: Output = "pseudo_accel",
                     warn: bool = True, n_res: int = _N_RES,
                     n_per_oct: int = _N_PER_OCT) -> ResponseMoments:
    """Exact spectral moments of the SDOF response to a base-acceleration PSD.

    Parameters
    ----------
    freq_hz : array_like, shape (m,)
        PSD breakpoint (or line) frequencies, strictly increasing. [Hz]
    asd_g2_hz : array_like, shape (m,)
        Input ASD (> 0), log-log interpolated between points, 0 outside the band.
        [g^2/Hz]
    fn_hz : array_like, shape (k,)
        Natural frequencies. [Hz]
    q : float
        Amplification factor, > 0.5. [unitless]
    output : {"pseudo_accel", "abs_accel", "rel_disp"}
        Response quantity (see the module notes). Default "pseudo_accel".
    warn : bool
        Emit an AccuracyWarning for fn outside the PSD band (default True).
    n_res, n_per_oct : int
        Quadrature density (resonance nodes; background nodes per octave).

    Returns
    -------
    ResponseMoments
        m0, m1, m2, m4 per fn. [u^2 Hz^k]

    Notes
    -----
    m_k = integral over the PSD band of G(f) |H(f)|^2 f^k df, by composite
    Simpson on the nodes of :func:`quadrature_nodes` (PSD points, 96 log points
    per octave, 320 resonance points mapped by f = fn (1 + tan(theta)/(2Q))),
    with the PSD evaluated on its exact log-log segments. The relative error is
    about 1e-8 at Q = 10 and below 1e-7 up to Q = 50 (docs/methods/fatigue.md
    shows the convergence).
    No white-noise (Miles) approximation is made.
    """
    f, g = _check_psd(freq_hz, asd_g2_hz)
    fn = _check_fn(fn_hz)
    q = v.check_q(q)
    if output not in ("pseudo_accel", "abs_accel", "rel_disp"):
        raise InputError("output", output, "must be 'pseudo_accel', 'abs_accel' or 'rel_disp'")
    if warn:
        warn_outside_band(fn, f)
    lf, lg = np.log(f), np.log(g)
    x = quadrature_nodes(f[0], f[-1], fn, q, fixed=f, n_res=n_res, n_per_oct=n_per_oct)
    xm = 0.5 * (x[:, :-1] + x[:, 1:])

    def integrand(xx):
        # G(f) on its log-log segments (same law as psd.asd_at) times |H|^2
        r2 = (xx / fn[:, None]) ** 2
        h2 = 1.0 / ((1.0 - r2) ** 2 + r2 / (q * q))
        if output == "abs_accel":
            h2 = h2 * (1.0 + r2 / (q * q))
        return np.exp(np.interp(np.log(xx), lf, lg)) * h2

    fx = integrand(x)
    fmid = 4.0 * integrand(xm)
    w = np.diff(x, axis=1) / 6.0
    moments = []
    for k in range(5):
        if k in (0, 1, 2, 4):
            moments.append(np.sum(w * (fx[:, :-1] + fmid + fx[:, 1:]), axis=1))
        if k < 4:
            fx = fx * x
            fmid = fmid * xm
    if output == "rel_disp":
        scale = (G0_M_S2 / (2.0 * np.pi * fn) ** 2) ** 2
        moments = [m * scale for m in moments]
    return ResponseMoments(fn, *moments, output=output)


@dataclass(frozen=True)
class MomentSensitivities:
    """m0 and m2 of the pseudo-acceleration response and their derivatives with respect
    to the logarithm of each PSD breakpoint value.

    Attributes
    ----------
    m0, m2 : numpy.ndarray, shape (k,)
        Moments per natural frequency. [g^2], [g^2 Hz^2]
    dm0, dm2 : numpy.ndarray, shape (k, p)
        dm_k[i, j] = d m_k(fn_i) / d ln G_j, G_j the ASD at breakpoint j. [as m_k]
    """

    m0: np.ndarray
    m2: np.ndarray
    dm0: np.ndarray
    dm2: np.ndarray


def moment_sensitivities(freq_hz, asd_g2_hz, fn_hz, q: float) -> MomentSensitivities:
    """Moments m0, m2 of the pseudo-acceleration response and their gradient with respect
    to the log of each breakpoint ASD (for Newton inversions of a response statistic).

    Parameters
    ----------
    freq_hz : array_like, shape (p,)
        PSD breakpoints, strictly increasing. [Hz]
    asd_g2_hz : array_like, shape (p,)
        Input ASD (> 0), log-log interpolated between breakpoints, 0 outside. [g^2/Hz]
    fn_hz : array_like, shape (k,)
        Natural frequencies. [Hz]
    q : float
        Amplification factor, > 0.5. [unitless]

    Returns
    -------
    MomentSensitivities

    Notes
    -----
    On the segment [f_j, f_j+1] the log-log PSD is ln G(f) = (1 - u) ln G_j + u ln G_j+1,
    u = ln(f / f_j) / ln(f_j+1 / f_j), so d G(f) / d ln G_j = G(f) (1 - u) and
    d G(f) / d ln G_j+1 = G(f) u. The derivatives are the integrals of these times
    |H|^2 f^k, on the same nodes and composite Simpson rule as
    :func:`response_moments` (Lalanne vol. 3 for the moments); m0 and m2 agree with it
    to rounding.
    """
    f, g = _check_psd(freq_hz, asd_g2_hz)
    fn = _check_fn(fn_hz)
    q = v.check_q(q)
    lf, lg = np.log(f), np.log(g)
    x = quadrature_nodes(f[0], f[-1], fn, q, fixed=f)
    xm = 0.5 * (x[:, :-1] + x[:, 1:])
    w = np.diff(x, axis=1) / 6.0
    pts = np.concatenate([x, xm], axis=1)
    # Simpson weight of every node (the two intervals it closes) and of every midpoint
    wn = np.zeros(x.shape)
    wn[:, :-1] += w
    wn[:, 1:] += w
    wts = np.concatenate([wn, 4.0 * w], axis=1)
    r2 = (pts / fn[:, None]) ** 2
    lp = np.log(pts)
    c0 = wts * np.exp(np.interp(lp, lf, lg)) / ((1.0 - r2) ** 2 + r2 / (q * q))
    c2 = c0 * pts * pts
    p, k = f.size, fn.size
    seg = np.clip(np.searchsorted(f, pts, side="right") - 1, 0, p - 2)
    u = np.clip((lp - lf[seg]) / (lf[seg + 1] - lf[seg]), 0.0, 1.0)
    cell = (np.arange(k)[:, None] * p + seg).ravel()

    def gradient(c: np.ndarray) -> np.ndarray:
        lo = np.bincount(cell, weights=(c * (1.0 - u)).ravel(), minlength=k * p)
        hi = np.bincount(cell + 1, weights=(c * u).ravel(), minlength=k * p + 1)[:k * p]
        return (lo + hi).reshape(k, p)

    return MomentSensitivities(c0.sum(axis=1), c2.sum(axis=1), gradient(c0), gradient(c2))


def response_rms(freq_hz, asd_g2_hz, fn_hz, q: float, *,
                 output: Output = "pseudo_accel") -> np.ndarray:
    """Exact rms of the SDOF response to a base-acceleration PSD.

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Input PSD. [Hz], [g^2/Hz]
    fn_hz : array_like
        Natural frequencies. [Hz]
    q : float
        Amplification factor. [unitless]
    output : {"pseudo_accel", "abs_accel", "rel_disp"}
        Response quantity.

    Returns
    -------
    numpy.ndarray
        sqrt(integral G |H|^2 df) per fn. [g rms, or m rms for "rel_disp"]
    """
    return response_moments(freq_hz, asd_g2_hz, fn_hz, q, output=output).rms
