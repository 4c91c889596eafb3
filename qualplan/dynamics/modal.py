"""Modal combination and peak-response estimates of base-driven structures.

A structure on a vibrating base is described by its modal summary: natural
frequencies fn_k [Hz], damping ratios zeta_k (Q_k = 1/(2 zeta_k)) and modal
effective masses m_eff,k [kg] in the excitation axis. Each mode responds as a
base-excited SDOF oscillator; the base reaction (force) is the sum of the
effective masses times their absolute accelerations,

    F(f) = g0 a_base(f) [ sum_k m_eff,k H_k(f) + m_res ],
    H_k(f) = (1 + 2 i zeta_k r_k) / (1 - r_k^2 + 2 i zeta_k r_k),  r_k = f / fn_k,

with m_res an optional residual (rigid) mass that moves with the base
(modal superposition with effective masses, Harris' Shock and Vibration
Handbook 6th ed., ch. 21 and 28; Chopra, Dynamics of Structures, base-excited
systems). Units inside: g, g^2/Hz, Hz, s, kg, N.

What the module gives:

- ``cqc_coefficients``: modal correlation coefficients of Der Kiureghian (1981);
- ``combine``: ABS, SRSS, NRL and CQC combinations of modal peaks;
- ``spectrum_response``: per-mode peaks from an SRS at fn and their combinations;
- ``random_response``: per-mode and coherent multi-mode rms under a base PSD;
- ``sine_response``: steady-state harmonic response, peak over a swept band;
- ``sigma_levels``, ``peak_factor``: Gaussian 1/2/3 sigma values and Davenport's
  expected peak factor;
- ``steinberg_allowable_displacement_m``, ``steinberg_check``: Steinberg's
  allowable board displacement for electronics under random vibration.

References
----------
.. [1] A. Der Kiureghian, "A response spectrum method for random vibration
   analysis of MDF systems", Earthquake Engineering and Structural Dynamics
   9(5), 419-435, 1981 (CQC correlation coefficients).
.. [2] E. L. Wilson, A. Der Kiureghian, E. P. Bayo, "A replacement for the SRSS
   method in seismic analysis", Earthquake Eng. Struct. Dyn. 9(2), 187-192, 1981.
.. [3] A. G. Davenport, "Note on the distribution of the largest value of a
   random function with application to gust loading", Proc. Institution of
   Civil Engineers 28(2), 187-196, 1964.
.. [4] J. W. Miles, "On structural fatigue under random loading", J.
   Aeronautical Sciences 21(11), 753-762, 1954.
.. [5] D. S. Steinberg, Vibration Analysis for Electronic Equipment, 3rd ed.,
   Wiley, 2000 (allowable board displacement, ch. 8; constants from memory).
.. [6] NRL summation: the Naval Research Laboratory method of shock design
   practice (largest modal peak plus the SRSS of the others), as used in US Navy
   shock design (NAVSEA practice; from memory).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Literal

import numpy as np

from qualplan.dynamics import _loglog
from qualplan.dynamics import _validate as v
from qualplan.dynamics.errors import AccuracyWarning, InputError
from qualplan.dynamics.psd import check_psd
from qualplan.dynamics.sdof import quadrature_nodes
from qualplan.dynamics.units import G0_M_S2, M_PER_IN

__all__ = [
    "EULER_GAMMA",
    "Method",
    "METHODS",
    "SigmaLevel",
    "SpectrumResponse",
    "RandomResponse",
    "SineResponse",
    "SteinbergCheck",
    "cqc_coefficients",
    "combine",
    "spectrum_response",
    "random_response",
    "QuantityResponse",
    "quantity_spectrum_peaks",
    "quantity_random_response",
    "sine_response",
    "sigma_levels",
    "peak_factor",
    "davenport_factor",
    "steinberg_allowable_displacement_m",
    "steinberg_check",
]

#: Euler-Mascheroni constant (Davenport's correction to the expected peak).
EULER_GAMMA = 0.5772156649015329

Method = Literal["abs", "srss", "nrl", "cqc"]
#: Combination methods of :func:`combine`.
METHODS: tuple[str, ...] = ("abs", "srss", "nrl", "cqc")


# --------------------------------------------------------------------- checks

def _modes(fn_hz, zeta, meff_kg=None):
    fn = v.as_1d_float("fn_hz", fn_hz)
    v.all_positive("fn_hz", fn)
    z = v.as_1d_float("zeta", zeta)
    if z.size == 1 and fn.size > 1:
        z = np.full(fn.size, z[0])
    if z.size != fn.size:
        raise InputError("zeta", f"{z.size} values",
                         f"must be one value or one per mode ({fn.size})")
    bad = (z <= 0) | (z >= 1)
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(f"zeta[{i}]", float(z[i]), "must lie in (0, 1) (underdamped mode)")
    if meff_kg is None:
        return fn, z, None
    m = v.as_1d_float("meff_kg", meff_kg)
    if m.size != fn.size:
        raise InputError("meff_kg", f"{m.size} values", f"must give one value per mode ({fn.size})")
    neg = m < 0
    if neg.any():
        i = int(np.argmax(neg))
        raise InputError(f"meff_kg[{i}]", float(m[i]), "must be >= 0")
    return fn, z, m


def _h_abs(f: np.ndarray, fn: float, z: float) -> np.ndarray:
    """Complex absolute-acceleration transmissibility of a base-excited mode."""
    r = f / fn
    c = 2j * z * r
    return (1.0 + c) / (1.0 - r * r + c)


# ---------------------------------------------------------------- combination

def cqc_coefficients(fn_hz, zeta) -> np.ndarray:
    """Modal correlation coefficients of the CQC rule (Der Kiureghian 1981).

    Parameters
    ----------
    fn_hz : array_like, shape (k,)
        Natural frequencies, > 0. [Hz]
    zeta : float or array_like, shape (k,)
        Damping ratios, one for all modes or one per mode, in (0, 1). [unitless]

    Returns
    -------
    numpy.ndarray, shape (k, k)
        rho_ij, symmetric, rho_ii = 1, 0 < rho_ij <= 1. [unitless]

    Notes
    -----
    With r = w_j / w_i (Der Kiureghian 1981, eq. for white-noise input):

        rho_ij = 8 sqrt(z_i z_j) (z_i + r z_j) r^(3/2)
                 / ((1 - r^2)^2 + 4 z_i z_j r (1 + r^2) + 4 (z_i^2 + z_j^2) r^2),

    which for equal damping z reduces to
    8 z^2 (1 + r) r^(3/2) / ((1 - r^2)^2 + 4 z^2 r (1 + r)^2) (Wilson, Der
    Kiureghian & Bayo 1981). It is the correlation of the modal displacement
    responses to a white-noise base excitation.
    """
    fn, z, _ = _modes(fn_hz, zeta)
    zi, zj = z[:, None], z[None, :]
    r = fn[None, :] / fn[:, None]
    num = 8.0 * np.sqrt(zi * zj) * (zi + r * zj) * r ** 1.5
    den = (1.0 - r * r) ** 2 + 4.0 * zi * zj * r * (1.0 + r * r) + 4.0 * (zi * zi + zj * zj) * r * r
    rho = num / den
    rho = 0.5 * (rho + rho.T)  # symmetric to rounding
    np.fill_diagonal(rho, 1.0)
    return rho


def combine(peaks, method: Method, rho=None) -> float:
    """Combine modal peak responses into one estimate of the peak response.

    Parameters
    ----------
    peaks : array_like, shape (k,)
        Signed modal peaks R_k (same unit, e.g. [N] or [g]).
    method : {"abs", "srss", "nrl", "cqc"}
        "abs": sum |R_k| (upper bound); "srss": sqrt(sum R_k^2) (well-separated
        modes); "nrl": |R_max| + sqrt(sum of the other R_k^2) (NRL summation,
        shock design practice); "cqc": sqrt(sum_i sum_j R_i rho_ij R_j)
        (Der Kiureghian 1981).
    rho : array_like, shape (k, k), optional
        Correlation matrix (:func:`cqc_coefficients`); required for "cqc".

    Returns
    -------
    float
        The combined peak, same unit as `peaks`, >= 0.
    """
    r = v.as_1d_float("peaks", peaks)
    if method not in METHODS:
        raise InputError("method", method, "must be one of 'abs', 'srss', 'nrl', 'cqc'")
    a = np.abs(r)
    if method == "abs":
        return float(a.sum())
    if method == "srss":
        return float(math.sqrt(float(np.dot(r, r))))
    if method == "nrl":
        i = int(np.argmax(a))
        others = np.delete(r, i)
        return float(a[i] + math.sqrt(float(np.dot(others, others))))
    if rho is None:
        raise InputError("rho", None, "is required for method 'cqc' (see cqc_coefficients)")
    p = np.asarray(rho, float)
    if p.shape != (r.size, r.size):
        raise InputError("rho", f"shape {p.shape}", f"must be ({r.size}, {r.size})")
    if not np.isfinite(p).all():
        raise InputError("rho", "non-finite values", "must be finite")
    s = float(r @ p @ r)
    if s < 0:
        raise InputError("rho", "not positive semi-definite", "gives a negative CQC sum")
    return float(math.sqrt(s))


# ------------------------------------------------------------------ spectrum

@dataclass(frozen=True)
class SpectrumResponse:
    """Peak responses of the modes to a shock response spectrum.

    Attributes
    ----------
    fn_hz, zeta, meff_kg : numpy.ndarray
        The modes. [Hz], [unitless], [kg]
    accel_g : numpy.ndarray
        Per-mode peak absolute acceleration of the effective mass, SRS(fn). [g]
    force_n : numpy.ndarray
        Per-mode peak base force m_eff SRS(fn) g0. [N]
    in_band : numpy.ndarray of bool
        Modes inside the SRS band (the others get 0 and are listed here).
    rho : numpy.ndarray, shape (k, k)
        CQC correlation coefficients. [unitless]
    force_combined_n : dict
        Base force by "abs", "srss", "nrl", "cqc". [N]
    """

    fn_hz: np.ndarray
    zeta: np.ndarray
    meff_kg: np.ndarray
    accel_g: np.ndarray
    force_n: np.ndarray
    in_band: np.ndarray
    rho: np.ndarray
    force_combined_n: dict


def spectrum_response(srs_freq_hz, srs_accel_g, fn_hz, zeta, meff_kg) -> SpectrumResponse:
    """Per-mode peaks and combined base force from a maximax absolute-acceleration SRS.

    Parameters
    ----------
    srs_freq_hz, srs_accel_g : array_like
        SRS breakpoints, log-log interpolated. [Hz], [g]
    fn_hz : array_like, shape (k,)
        Natural frequencies. [Hz]
    zeta : float or array_like
        Damping ratios (the SRS should be computed at the same damping). [unitless]
    meff_kg : array_like, shape (k,)
        Modal effective masses in the excitation axis. [kg]

    Returns
    -------
    SpectrumResponse
        Per-mode peaks SRS(fn_k) [g] and m_eff,k SRS(fn_k) g0 [N], combined by
        ABS, SRSS, NRL and CQC (Der Kiureghian 1981).

    Warns
    -----
    AccuracyWarning
        For modes outside the SRS band (their peak is not defined by the SRS
        and is set to 0: check them separately).
    """
    f, a = _loglog.check_profile(srs_freq_hz, srs_accel_g, "srs_freq_hz", "srs_accel_g")
    fn, z, m = _modes(fn_hz, zeta, meff_kg)
    inside = (fn >= f[0]) & (fn <= f[-1])
    if not inside.all():
        warnings.warn(
            f"{int((~inside).sum())} modes lie outside the SRS band [{f[0]:g}, {f[-1]:g}] Hz "
            f"(e.g. fn = {fn[~inside][0]:g} Hz): their peaks are not defined by the SRS and "
            "are left out of the combinations", AccuracyWarning, stacklevel=2)
    acc = np.where(inside, _loglog.interp(f, a, fn), 0.0)
    force = m * acc * G0_M_S2
    rho = cqc_coefficients(fn, z)
    combos = {k: combine(force, k, rho) for k in METHODS}
    return SpectrumResponse(fn, z, m, acc, force, inside, rho, combos)


# -------------------------------------------------------------------- random

@dataclass(frozen=True)
class RandomResponse:
    """Response of the modes to a stationary random base acceleration.

    Attributes
    ----------
    fn_hz, zeta, meff_kg : numpy.ndarray
        The modes. [Hz], [unitless], [kg]
    residual_kg : float
        Rigid (residual) mass moving with the base. [kg]
    mode_accel_rms_g : numpy.ndarray
        Per mode: rms absolute acceleration of the effective mass. [g rms]
    mode_force_rms_n : numpy.ndarray
        Per mode: rms base force m_eff,k g0 x the above. [N rms]
    mode_nu0_hz : numpy.ndarray
        Per mode: zero up-crossing rate sqrt(m2/m0) of its response. [Hz]
    force_rms_n : float
        Total base force rms by coherent integration of |sum of modal terms|^2 W. [N rms]
    accel_rms_g : float
        Total: rms acceleration of the centre of the effective masses,
        F / (g0 (sum m_eff + m_res)). [g rms]
    nu0_hz : float
        Zero up-crossing rate of the total force, sqrt(m2/m0). [Hz]
    force_srss_rms_n : float
        SRSS of the modal force rms plus the residual term, for comparison
        (reads low for closely spaced modes). [N rms]
    """

    fn_hz: np.ndarray
    zeta: np.ndarray
    meff_kg: np.ndarray
    residual_kg: float
    mode_accel_rms_g: np.ndarray
    mode_force_rms_n: np.ndarray
    mode_nu0_hz: np.ndarray
    force_rms_n: float
    accel_rms_g: float
    nu0_hz: float
    force_srss_rms_n: float


def _simpson_nodes(f_lo: float, f_hi: float, fn: np.ndarray, z: np.ndarray,
                   fixed: np.ndarray, n_res: int) -> tuple[np.ndarray, np.ndarray]:
    nodes = [fixed]
    for k in range(fn.size):
        q = 1.0 / (2.0 * z[k])
        nodes.append(quadrature_nodes(f_lo, f_hi, fn[k:k + 1], q, fixed=fixed, n_res=n_res)[0])
    x = np.unique(np.concatenate(nodes))
    return x, 0.5 * (x[:-1] + x[1:])


def _simpson(x: np.ndarray, fx: np.ndarray, fm: np.ndarray) -> float:
    return float(np.sum(np.diff(x) / 6.0 * (fx[:-1] + 4.0 * fm + fx[1:])))


def random_response(freq_hz, asd_g2_hz, fn_hz, zeta, meff_kg, *, residual_kg: float = 0.0,
                    n_res: int = 320) -> RandomResponse:
    """Per-mode and multi-mode rms response to a base-acceleration PSD.

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Base-acceleration ASD breakpoints, log-log interpolated, 0 outside the
        band. [Hz], [g^2/Hz]
    fn_hz : array_like, shape (k,)
        Natural frequencies. [Hz]
    zeta : float or array_like
        Damping ratios, one or one per mode. [unitless]
    meff_kg : array_like, shape (k,)
        Modal effective masses in the excitation axis, >= 0. [kg]
    residual_kg : float
        Residual mass (total mass minus the sum of the effective masses of the
        retained modes) moving rigidly with the base, >= 0; default 0. [kg]
    n_res : int
        Quadrature nodes around each resonance (default 320).

    Returns
    -------
    RandomResponse
        Per-mode rms, total rms and zero-crossing rates.

    Notes
    -----
    Modal superposition with effective masses: the base-force PSD is
    g0^2 |sum_k m_eff,k H_k(f) + m_res|^2 W(f) with H_k the complex
    absolute-acceleration transmissibility of mode k; its mean square is the
    integral over the PSD band (composite Simpson on the PSD breakpoints, a
    log background grid and n_res nodes per mode mapped by
    f = fn (1 + tan(theta) / (2 Q)), as :func:`qualplan.dynamics.sdof.response_moments`).
    The cross terms make the total differ from the SRSS of the modal rms
    (larger for close modes of same-sign effective mass). A single mode with
    a flat W reproduces the exact SDOF integral, which tends to Miles (1954)
    sqrt((pi/2) fn Q W) x sqrt(1 + 1/Q^2) for an unbounded band.
    """
    f, w = check_psd(freq_hz, asd_g2_hz)
    fn, z, m = _modes(fn_hz, zeta, meff_kg)
    mres = float(residual_kg)
    if not math.isfinite(mres) or mres < 0:
        raise InputError("residual_kg", residual_kg, "must be a finite number >= 0")
    if int(n_res) != n_res or n_res < 8:
        raise InputError("n_res", n_res, "must be a whole number >= 8")
    x, xm = _simpson_nodes(f[0], f[-1], fn, z, f, int(n_res))
    lf, lw = np.log(f), np.log(w)
    wx = np.exp(np.interp(np.log(x), lf, lw))
    wm = np.exp(np.interp(np.log(xm), lf, lw))
    sx = np.full(x.shape, mres, complex)
    sm = np.full(xm.shape, mres, complex)
    mode_ms = np.empty(fn.size)
    mode_m2 = np.empty(fn.size)
    for k in range(fn.size):
        hx, hm = _h_abs(x, fn[k], z[k]), _h_abs(xm, fn[k], z[k])
        px, pm = (hx.real ** 2 + hx.imag ** 2) * wx, (hm.real ** 2 + hm.imag ** 2) * wm
        mode_ms[k] = _simpson(x, px, pm)
        mode_m2[k] = _simpson(x, px * x * x, pm * xm * xm)
        sx += m[k] * hx
        sm += m[k] * hm
    px, pm = (np.abs(sx) ** 2) * wx, (np.abs(sm) ** 2) * wm
    m0 = _simpson(x, px, pm)
    m2 = _simpson(x, px * x * x, pm * xm * xm)
    mode_acc = np.sqrt(mode_ms)
    mode_force = m * mode_acc * G0_M_S2
    force = math.sqrt(m0) * G0_M_S2
    mass = float(m.sum()) + mres
    acc = force / (G0_M_S2 * mass) if mass > 0 else 0.0
    rigid_ms = mres ** 2 * _simpson(x, wx, wm)
    srss = math.sqrt(float(np.dot(mode_force, mode_force)) + rigid_ms * G0_M_S2 ** 2)
    return RandomResponse(
        fn_hz=fn, zeta=z, meff_kg=m, residual_kg=mres, mode_accel_rms_g=mode_acc,
        mode_force_rms_n=mode_force, mode_nu0_hz=np.sqrt(mode_m2 / mode_ms),
        force_rms_n=force, accel_rms_g=acc,
        nu0_hz=math.sqrt(m2 / m0) if m0 > 0 else 0.0, force_srss_rms_n=srss)


# ------------------------------------------------- response quantity of the modes

def _quantity_inputs(fn_hz, zeta, gamma, phi):
    fn, z, _ = _modes(fn_hz, zeta)
    g = v.as_1d_float("gamma", gamma)
    r = v.as_1d_float("phi", phi)
    for name, arr in (("gamma", g), ("phi", r)):
        if arr.size != fn.size:
            raise InputError(name, f"{arr.size} values", f"must give one value per mode "
                             f"({fn.size})")
    return fn, z, g, r


def quantity_spectrum_peaks(srs_at_fn_g, fn_hz, gamma, phi) -> np.ndarray:
    """Signed modal peaks of a response quantity from the SRS at each fn (mode displacement).

    Parameters
    ----------
    srs_at_fn_g : array_like, shape (k,)
        SRS (maximax, taken as the pseudo-acceleration) at each fn. [g]
    fn_hz : array_like, shape (k,)
        Natural frequencies. [Hz]
    gamma : array_like, shape (k,)
        Participation factors in the excitation axis (mass-normalised modes:
        m_eff = gamma^2). [sqrt(kg)]
    phi : array_like, shape (k,)
        Response quantity per unit modal coordinate. [unit / (m sqrt(kg))]

    Returns
    -------
    numpy.ndarray
        R_k = phi_k gamma_k SRS(fn_k) g0 / (2 pi fn_k)^2, signed. [unit]

    Notes
    -----
    The modal coordinate's peak is gamma S_d with the spectral displacement
    S_d = S_pa / w^2 (response spectrum method; Chopra, Dynamics of Structures,
    ch. 13). Valid for a quantity linear in the relative displacements (stress,
    strain, internal force, relative displacement), not for absolute acceleration.
    Combine with :func:`combine` (signs matter for CQC).
    """
    fn, _, g, r = _quantity_inputs(fn_hz, np.full(np.size(fn_hz), 0.05), gamma, phi)
    sa = v.as_1d_float("srs_at_fn_g", srs_at_fn_g)
    if sa.size != fn.size:
        raise InputError("srs_at_fn_g", f"{sa.size} values", f"must give one per mode "
                         f"({fn.size})")
    return r * g * sa * G0_M_S2 / (2.0 * np.pi * fn) ** 2


@dataclass(frozen=True)
class QuantityResponse:
    """Random response of a quantity linear in the modal coordinates.

    Attributes
    ----------
    mode_rms : numpy.ndarray
        Per mode: rms of phi_k q_k. [unit rms]
    rms : float
        Coherent total: sqrt(integral |sum phi_k q_k(f)|^2 df). [unit rms]
    nu0_hz : float
        Zero up-crossing rate of the total, sqrt(m2/m0). [Hz]
    """

    mode_rms: np.ndarray
    rms: float
    nu0_hz: float


def quantity_random_response(freq_hz, asd_g2_hz, fn_hz, zeta, gamma, phi, *,
                             n_res: int = 320) -> QuantityResponse:
    """Random response of a quantity from its value per unit modal coordinate.

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Base-acceleration ASD breakpoints. [Hz], [g^2/Hz]
    fn_hz : array_like, shape (k,)
        Natural frequencies. [Hz]
    zeta : float or array_like
        Damping ratios. [unitless]
    gamma : array_like, shape (k,)
        Participation factors in the axis. [sqrt(kg)]
    phi : array_like, shape (k,)
        Response per unit modal coordinate. [unit / (m sqrt(kg))]
    n_res : int
        Quadrature nodes per resonance.

    Returns
    -------
    QuantityResponse

    Notes
    -----
    q_k'' + 2 zeta_k w_k q_k' + w_k^2 q_k = -gamma_k a_base: the modal coordinate's
    transfer is -gamma_k g0 / (w_k^2 - w^2 + 2 i zeta_k w_k w) (mode displacement
    method), and R(f) = sum_k phi_k q_k(f) integrated coherently over W(f) as in
    :func:`random_response`. A single mode with gamma = phi = 1 is the SDOF relative
    displacement [m].
    """
    f, w = check_psd(freq_hz, asd_g2_hz)
    fn, z, g, r = _quantity_inputs(fn_hz, zeta, gamma, phi)
    if int(n_res) != n_res or n_res < 8:
        raise InputError("n_res", n_res, "must be a whole number >= 8")
    x, xm = _simpson_nodes(f[0], f[-1], fn, z, f, int(n_res))
    lf, lw = np.log(f), np.log(w)
    wx = np.exp(np.interp(np.log(x), lf, lw))
    wm = np.exp(np.interp(np.log(xm), lf, lw))
    sx = np.zeros(x.shape, complex)
    sm = np.zeros(xm.shape, complex)
    mode_ms = np.empty(fn.size)
    for k in range(fn.size):
        wk = 2.0 * np.pi * fn[k]

        def h(ff, wk=wk, k=k):
            om = 2.0 * np.pi * ff
            return -g[k] * r[k] * G0_M_S2 / (wk * wk - om * om + 2j * z[k] * wk * om)

        hx, hm = h(x), h(xm)
        mode_ms[k] = _simpson(x, np.abs(hx) ** 2 * wx, np.abs(hm) ** 2 * wm)
        sx += hx
        sm += hm
    px, pm = np.abs(sx) ** 2 * wx, np.abs(sm) ** 2 * wm
    m0 = _simpson(x, px, pm)
    m2 = _simpson(x, px * x * x, pm * xm * xm)
    return QuantityResponse(np.sqrt(mode_ms), math.sqrt(m0),
                            math.sqrt(m2 / m0) if m0 > 0 else 0.0)


# ---------------------------------------------------------------------- sine

@dataclass(frozen=True)
class SineResponse:
    """Steady-state harmonic response of the modes, peak over a swept band.

    Attributes
    ----------
    fn_hz, zeta, meff_kg : numpy.ndarray
        The modes. [Hz], [unitless], [kg]
    mode_accel_g : numpy.ndarray
        Per mode: peak over the band of a(f) |H_k(f)|, the absolute acceleration
        of its effective mass. [g peak]
    mode_freq_hz : numpy.ndarray
        Excitation frequency of that peak. [Hz]
    mode_force_n : numpy.ndarray
        Per mode: m_eff,k g0 mode_accel_g. [N peak]
    force_n : float
        Peak over the band of the total base force
        g0 a(f) |sum_k m_eff,k H_k(f) + m_res| (exact steady state). [N peak]
    force_freq_hz : float
        Excitation frequency of the peak force. [Hz]
    """

    fn_hz: np.ndarray
    zeta: np.ndarray
    meff_kg: np.ndarray
    mode_accel_g: np.ndarray
    mode_freq_hz: np.ndarray
    mode_force_n: np.ndarray
    force_n: float
    force_freq_hz: float


def _sine_amplitude(freq_hz, accel_g):
    f = v.as_1d_float("freq_hz", freq_hz, min_size=2)
    a = v.as_1d_float("accel_g", accel_g, min_size=2)
    if a.size != f.size:
        raise InputError("accel_g", f"{a.size} values", f"must match freq_hz ({f.size} values)")
    v.all_positive("freq_hz", f)
    v.all_positive("accel_g", a)
    d = np.diff(f)
    if (d < 0).any():
        i = int(np.argmax(d < 0))
        raise InputError(f"freq_hz[{i + 1}]", float(f[i + 1]),
                         "must be non-decreasing (a frequency may repeat once for a step)")
    zero = d == 0
    if zero[0] or zero[-1] or (zero[1:] & zero[:-1]).any():
        i = int(np.argmax(zero))
        raise InputError(f"freq_hz[{i + 1}]", float(f[i + 1]),
                         "a repeated frequency (a step) must lie inside the band, once")
    return f, a


def sine_response(freq_hz, accel_g, fn_hz, zeta, meff_kg, *, residual_kg: float = 0.0,
                  n_res: int = 400) -> SineResponse:
    """Steady-state sine response of the modes, peak over a swept band.

    Parameters
    ----------
    freq_hz, accel_g : array_like
        Sine amplitude breakpoints (peak base acceleration), log-log
        interpolated; a frequency may repeat once for a step between bands
        (constant-displacement, -velocity and -acceleration bands are straight
        lines in log-log axes, so band edges as breakpoints are exact). [Hz], [g]
    fn_hz : array_like, shape (k,)
        Natural frequencies. [Hz]
    zeta : float or array_like
        Damping ratios. [unitless]
    meff_kg : array_like, shape (k,)
        Modal effective masses. [kg]
    residual_kg : float
        Rigid mass moving with the base. [kg]
    n_res : int
        Frequencies examined around each resonance (default 400).

    Returns
    -------
    SineResponse

    Notes
    -----
    Quasi-steady (slow sweep): the response at each frequency is the steady
    state a(f) |H(f)| (Harris' Shock and Vibration Handbook, ch. 2). A fast
    sweep does not let the response build up; the values are then upper
    bounds (:func:`qualplan.dynamics.extreme.ers_sweep` warns on the sweep rate).
    """
    f, a = _sine_amplitude(freq_hz, accel_g)
    fn, z, m = _modes(fn_hz, zeta, meff_kg)
    mres = float(residual_kg)
    if not math.isfinite(mres) or mres < 0:
        raise InputError("residual_kg", residual_kg, "must be a finite number >= 0")
    if int(n_res) != n_res or n_res < 8:
        raise InputError("n_res", n_res, "must be a whole number >= 8")
    lo, hi = float(f[0]), float(f[-1])
    theta = np.linspace(-0.5 * np.pi, 0.5 * np.pi, int(n_res) + 2)[1:-1]
    parts = [np.geomspace(lo, hi, max(int(96 * math.log2(hi / lo)) + 2, 2)), f]
    for k in range(fn.size):
        parts.append(fn[k] * (1.0 + np.tan(theta) * z[k]))
        parts.append([fn[k] * math.sqrt(max(1.0 - 2.0 * z[k] ** 2, 0.0)), fn[k]])
    x = np.unique(np.clip(np.concatenate(parts), lo, hi))
    # amplitude on each side of a step: evaluate with the segment the node belongs to
    amp = _step_interp(f, a, x)
    tot = np.full(x.shape, mres, complex)
    acc = np.empty(fn.size)
    at = np.empty(fn.size)
    for k in range(fn.size):
        h = _h_abs(x, fn[k], z[k])
        resp = amp * np.abs(h)
        j = int(np.argmax(resp))
        acc[k], at[k] = resp[j], x[j]
        tot += m[k] * h
    ftot = amp * np.abs(tot) * G0_M_S2
    j = int(np.argmax(ftot))
    return SineResponse(fn, z, m, acc, at, m * acc * G0_M_S2, float(ftot[j]), float(x[j]))


def _step_interp(f: np.ndarray, a: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Log-log interpolation allowing one repeated frequency (a step: the larger value)."""
    out = np.zeros_like(x)
    for i in range(f.size - 1):
        if f[i + 1] == f[i]:
            continue
        sel = (x >= f[i]) & (x <= f[i + 1])
        n = math.log(a[i + 1] / a[i]) / math.log(f[i + 1] / f[i])
        out[sel] = np.maximum(out[sel], a[i] * (x[sel] / f[i]) ** n)
    return out


# ---------------------------------------------------------------- statistics

@dataclass(frozen=True)
class SigmaLevel:
    """A k-sigma value of a zero-mean Gaussian response.

    Attributes
    ----------
    k : int
        Multiple of the rms (1, 2 or 3).
    value : float
        k x rms, same unit as the rms.
    probability : float
        P(|x| <= k sigma) = erf(k / sqrt(2)). [unitless, 0..1]
    """

    k: int
    value: float
    probability: float


def sigma_levels(rms) -> tuple[SigmaLevel, SigmaLevel, SigmaLevel]:
    """The 1, 2 and 3 sigma values of a zero-mean Gaussian response.

    Parameters
    ----------
    rms : float
        Response rms (= standard deviation of a zero-mean process), >= 0. [any unit]

    Returns
    -------
    tuple of SigmaLevel
        (1 sigma, 68.27 %), (2 sigma, 95.45 %), (3 sigma, 99.73 %): the
        probability that the instantaneous value lies within +/- k sigma,
        erf(k / sqrt(2)) (any table of the normal distribution).
    """
    try:
        s = float(rms)
    except (TypeError, ValueError) as exc:
        raise InputError("rms", rms, "must be a number") from exc
    if not math.isfinite(s) or s < 0:
        raise InputError("rms", rms, "must be a finite number >= 0")
    return tuple(SigmaLevel(k, k * s, math.erf(k / math.sqrt(2.0))) for k in (1, 2, 3))


def davenport_factor(n_crossings) -> np.ndarray:
    """Davenport's expected peak factor for n mean up-crossings (see :func:`peak_factor`).

    Parameters
    ----------
    n_crossings : array_like
        Expected number of zero up-crossings over the exposure, nu0 T, > 1. [count]

    Returns
    -------
    numpy.ndarray
        sqrt(2 ln n) + 0.5772 / sqrt(2 ln n). [unitless]
    """
    n = np.asarray(n_crossings, float)
    if not np.isfinite(n).all() or (n <= 1).any():
        raise InputError("n_crossings", n, "must exceed 1 (exposure shorter than one cycle)")
    u0 = np.sqrt(2.0 * np.log(n))
    return u0 + EULER_GAMMA / u0


def peak_factor(nu0_hz, duration_s) -> np.ndarray | float:
    """Davenport's expected peak factor (largest peak / rms) of a Gaussian process.

    Parameters
    ----------
    nu0_hz : float or array_like
        Zero up-crossing rate of the response, sqrt(m2/m0) (Rice). [Hz]
    duration_s : float or array_like
        Exposure duration. [s]

    Returns
    -------
    float or numpy.ndarray
        u = sqrt(2 ln(nu0 T)) + gamma / sqrt(2 ln(nu0 T)), gamma = 0.5772
        (Davenport 1964, eq. for the mean of the largest value). [unitless]

    Notes
    -----
    Asymptotic for large nu0 T (narrow-band Gaussian, Poisson crossings);
    counts positive peaks (use 2 nu0 for the largest absolute value).
    nu0 T must exceed 1.
    """
    nu = np.asarray(nu0_hz, float)
    t = np.asarray(duration_s, float)
    if not np.isfinite(nu).all() or (nu <= 0).any():
        raise InputError("nu0_hz", nu0_hz, "must be finite numbers > 0")
    if not np.isfinite(t).all() or (t <= 0).any():
        raise InputError("duration_s", duration_s, "must be finite numbers > 0")
    n = nu * t
    if (n <= 1).any():
        raise InputError("nu0_hz * duration_s", n,
                         "must exceed 1 (exposure shorter than one cycle)")
    u = davenport_factor(n)
    return float(u) if u.ndim == 0 else u


# ------------------------------------------------------------------ Steinberg

@dataclass(frozen=True)
class SteinbergCheck:
    """Steinberg's random-vibration fatigue check of a circuit board.

    Attributes
    ----------
    z_rms_m : float
        Board single-amplitude displacement rms at its fn, g0 G_rms / (2 pi fn)^2. [m]
    z_3sigma_m : float
        3 x z_rms. [m]
    z_allow_m : float
        Allowable single-amplitude displacement for about 2e7 stress reversals. [m]
    ratio : float
        z_allow / z_3sigma (>= 1 passes). [unitless]
    passes : bool
    """

    z_rms_m: float
    z_3sigma_m: float
    z_allow_m: float
    ratio: float
    passes: bool


def steinberg_allowable_displacement_m(board_edge_m: float, component_length_m: float,
                                       board_thickness_m: float, c: float = 1.0,
                                       r: float = 1.0) -> float:
    """Steinberg's allowable single-amplitude board displacement (random, 3 sigma).

    Parameters
    ----------
    board_edge_m : float
        Length B of the board edge parallel to the component. [m]
    component_length_m : float
        Length L of the component body. [m]
    board_thickness_m : float
        Board thickness h. [m]
    c : float
        Component constant (from memory of Steinberg 3rd ed.: 1.0 standard
        dual in-line package, 1.26 DIP with side-brazed leads, 1.0 pin grid
        array, 2.25 leadless ceramic chip carrier). [unitless]
    r : float
        Relative position factor of the component on the board (from memory:
        1.0 at the centre, 0.707 at a quarter point, 0.5 at a quarter point of
        both directions). [unitless]

    Returns
    -------
    float
        Z = 0.00022 B / (c h r sqrt(L)) with B, h, L in inches, converted to
        metres. [m]

    Notes
    -----
    Steinberg, Vibration Analysis for Electronic Equipment, 3rd ed. (2000),
    ch. 8: the 3-sigma board displacement at this value gives about 20 million
    stress reversals of the component leads. The constant 0.00022 and the
    component factors are quoted from memory: verify them against the book
    before relying on the result.
    """
    b = v.positive_scalar("board_edge_m", board_edge_m) / M_PER_IN
    ell = v.positive_scalar("component_length_m", component_length_m) / M_PER_IN
    h = v.positive_scalar("board_thickness_m", board_thickness_m) / M_PER_IN
    c = v.positive_scalar("c", c)
    r = v.positive_scalar("r", r)
    return 0.00022 * b / (c * h * r * math.sqrt(ell)) * M_PER_IN


def steinberg_check(fn_hz: float, response_grms: float, board_edge_m: float,
                    component_length_m: float, board_thickness_m: float, *, c: float = 1.0,
                    r: float = 1.0) -> SteinbergCheck:
    """Steinberg's board-displacement fatigue check under random vibration.

    Parameters
    ----------
    fn_hz : float
        Fundamental frequency of the board. [Hz]
    response_grms : float
        Board response at fn (e.g. Miles' g rms or :func:`random_response`). [g rms]
    board_edge_m, component_length_m, board_thickness_m, c, r
        See :func:`steinberg_allowable_displacement_m`.

    Returns
    -------
    SteinbergCheck
        z_rms = g0 G_rms / (2 pi fn)^2 (Steinberg's 9.8 G / fn^2 in inches),
        its 3-sigma value and the allowable (Steinberg 3rd ed., 2000; constants
        from memory).
    """
    fn = v.positive_scalar("fn_hz", fn_hz)
    g = float(response_grms)
    if not math.isfinite(g) or g < 0:
        raise InputError("response_grms", response_grms, "must be a finite number >= 0")
    z = g * G0_M_S2 / (2.0 * math.pi * fn) ** 2
    za = steinberg_allowable_displacement_m(board_edge_m, component_length_m,
                                            board_thickness_m, c, r)
    z3 = 3.0 * z
    ratio = za / z3 if z3 > 0 else math.inf
    return SteinbergCheck(z, z3, za, ratio, ratio >= 1.0)
