"""Extreme response spectra (ERS) of random, sine, swept-sine and shock environments.

Convention (as for the FDS, :mod:`qualplan.dynamics.fatigue`): bank of
base-excited SDOF oscillators; the response is the pseudo-acceleration
(2 pi fn)^2 z of the relative displacement z, in g; the ERS is the largest
response over the exposure.

References
----------
.. [1] C. Lalanne, Mechanical Vibration and Shock Analysis, vol. 5
   "Specification Development" (ERS), vol. 3 "Random Vibration" (peak
   statistics), ISTE/Wiley, 2nd ed. 2009.
.. [2] A. G. Davenport, "Note on the distribution of the largest value of a
   random function with application to gust loading", Proc. ICE 28, 1964.
.. [3] D. E. Cartwright, M. S. Longuet-Higgins, "The statistical distribution of
   the maxima of a random function", Proc. R. Soc. A 237, 1956.
.. [4] S. O. Rice, "Mathematical analysis of random noise", Bell System
   Technical Journal 23-24, 1944-45.
"""

from __future__ import annotations

import math
import warnings
from typing import Literal

import numpy as np

from qualplan.dynamics import _validate as v
from qualplan.dynamics import modal, sdof
from qualplan.dynamics.errors import AccuracyWarning, InputError
from qualplan.dynamics.sine import Sweep
from qualplan.dynamics.units import G0_M_S2

__all__ = ["ers_random", "peak_factor", "ers_sine_dwell", "ers_sweep", "ers_shock",
           "ers_shock_warnings"]

#: Euler-Mascheroni constant (Davenport's correction); defined in :mod:`modal`.
EULER_GAMMA = modal.EULER_GAMMA


def peak_factor(n_crossings, *, method: Literal["davenport", "u0"] = "davenport") -> np.ndarray:
    """Peak factor (largest peak / rms) of a Gaussian narrow-band process.

    Parameters
    ----------
    n_crossings : array_like
        Expected number of up-crossings of the mean over the exposure,
        n0+ T (double it for the largest absolute value). [count]
    method : {"davenport", "u0"}
        "davenport": expected largest peak u0 + gamma / u0 (Davenport 1964,
        gamma = 0.5772; the one implementation is
        :func:`qualplan.dynamics.modal.davenport_factor`); "u0": the level
        exceeded once on average,
        u0 = sqrt(2 ln(n0+ T)) (Lalanne's usual form).

    Returns
    -------
    numpy.ndarray
        Peak factor. [unitless]
    """
    n = np.asarray(n_crossings, float)
    if (n <= 1).any():
        raise InputError("n_crossings", n, "must exceed 1 (exposure shorter than one cycle)")
    if method == "u0":
        return np.sqrt(2.0 * np.log(n))
    if method == "davenport":
        return modal.davenport_factor(n)
    raise InputError("method", method, "must be 'davenport' or 'u0'")


def ers_random(freq_hz, asd_g2_hz, duration_s: float, fn_hz, q: float, *,
               method: Literal["davenport", "u0"] = "davenport",
               two_sided: bool = False) -> np.ndarray:
    """Extreme response spectrum of a stationary random PSD over a duration.

    Parameters
    ----------
    freq_hz : array_like
        PSD breakpoints (or lines). [Hz]
    asd_g2_hz : array_like
        Base-acceleration ASD, > 0, log-log interpolated. [g^2/Hz]
    duration_s : float
        Exposure time. [s]
    fn_hz : array_like
        Natural frequencies. [Hz]
    q : float
        Amplification factor, > 0.5. [unitless]
    method : {"davenport", "u0"}
        "davenport" (default): the expected largest peak, u = u0 + 0.5772 / u0
        (Davenport 1964); "u0": the level exceeded once on average by the
        positive peaks, u0 = sqrt(2 ln(n0+ T)) (Lalanne vol. 5).
    two_sided : bool
        Largest absolute value (positive or negative): counts 2 n0+ T
        crossings. Default False (positive peaks).

    Returns
    -------
    numpy.ndarray
        ERS(fn) = sqrt(m0) u(n0+ T). [g]

    Warns
    -----
    AccuracyWarning
        For natural frequencies outside the PSD band.

    Notes
    -----
    m0, m2: exact spectral moments of the pseudo-acceleration response
    (:func:`qualplan.dynamics.sdof.response_moments`), n0+ = sqrt(m2/m0) (Rice).
    Gaussian, narrow-band response assumed (Rayleigh peaks). Clumping of
    narrow-band peaks makes simulated maxima a few % lower than Davenport's value.
    """
    t = v.positive_scalar("duration_s", duration_s)
    m = sdof.response_moments(freq_hz, asd_g2_hz, fn_hz, q, warn=False)
    sdof.warn_outside_band(m.fn_hz, np.asarray(freq_hz, float))
    n = m.zero_up_rate_hz * t * (2.0 if two_sided else 1.0)
    return m.rms * peak_factor(n, method=method)


def ers_sine_dwell(freq_hz: float, accel_g: float, fn_hz, q: float) -> np.ndarray:
    """ERS of a sine dwell: a |H_pa(f)| (steady state), equal to Q a at fn = f.

    Parameters
    ----------
    freq_hz : float
        Dwell frequency. [Hz]
    accel_g : float
        Peak base acceleration. [g]
    fn_hz : array_like
        Natural frequencies. [Hz]
    q : float
        Amplification factor, > 0.5. [unitless]

    Returns
    -------
    numpy.ndarray
        a / sqrt((1 - r^2)^2 + (r/Q)^2), r = f / fn. [g]
    """
    f0 = v.positive_scalar("freq_hz", freq_hz)
    a = v.positive_scalar("accel_g", accel_g)
    fn = sdof._check_fn(fn_hz)
    q = v.check_q(q)
    r = f0 / fn
    return a / np.sqrt((1 - r * r) ** 2 + (r / q) ** 2)


def ers_sweep(sweep: Sweep, fn_hz, q: float, *, n_res: int = 400) -> np.ndarray:
    """ERS of a swept sine: max over the swept band of a(f) |H_pa(f)| (quasi-steady).

    Parameters
    ----------
    sweep : Sweep
        The sweep.
    fn_hz : array_like
        Natural frequencies. [Hz]
    q : float
        Amplification factor, > 0.5. [unitless]
    n_res : int
        Frequencies examined around each resonance (default 400).

    Returns
    -------
    numpy.ndarray
        ERS(fn), about Q a(fn) for fn inside the band. [g]

    Warns
    -----
    AccuracyWarning
        When eta = Q^2 (df/dt)/fn^2 > 0.1 for an fn inside the band.

    Notes
    -----
    Caveat: a fast sweep does not let the response build up to its steady
    state; the real peak is then lower than this quasi-steady value (and
    the response rings after the passage). The returned value is an upper
    bound; it is accurate within 0.1 % for eta < 0.03.
    """
    from qualplan.dynamics.fatigue import sweep_severity

    if not isinstance(sweep, Sweep):
        raise InputError("sweep", type(sweep).__name__, "must be a sine.Sweep")
    fn = sdof._check_fn(fn_hz)
    q = v.check_q(q)
    lo, hi = sweep.band_hz
    eta = sweep_severity(sweep, fn, q)
    fast = (eta > 0.1) & (fn >= lo) & (fn <= hi)
    if fast.any():
        warnings.warn(
            f"fast sweep for {int(fast.sum())} natural frequencies (eta up to "
            f"{eta[fast].max():.3g} > 0.1): the quasi-steady ERS is an upper bound there",
            AccuracyWarning, stacklevel=2)
    brk = sweep.spec.breaks_hz
    brk = np.concatenate([[lo, hi], brk[(brk > lo) & (brk < hi)]])
    x = sdof.quadrature_nodes(lo, hi, fn, q, fixed=brk, n_res=n_res)
    # the peak of |H_pa| sits at fn sqrt(1 - 1/(2 Q^2)); add it explicitly
    fpk = np.clip(fn * math.sqrt(max(1.0 - 0.5 / q**2, 0.0)), lo, hi)
    x = np.concatenate([x, fpk[:, None], x * (1 - 1e-12), x * (1 + 1e-12)], axis=1)
    x = np.clip(x, lo, hi)
    r = x / fn[:, None]
    resp = sweep.spec.accel_g(x) / np.sqrt((1 - r * r) ** 2 + (r / q) ** 2)
    return resp.max(axis=1)


def ers_shock_warnings(accel_g, dt_s: float, fn_hz, method: str = "ramp"
                       ) -> tuple[str, ...]:
    """The AccuracyWarning texts :func:`ers_shock` (pseudo-acceleration, input model
    ``method``) gives for a record: natural frequencies beyond the method's verified
    range, a record that ends while its input is still active, a step or kink that a
    band-limited reconstruction rings on. For callers that take the ERS from another pass
    over the same response (e.g. ``fatigue.fds_time(..., return_peak=True)``).

    Parameters
    ----------
    accel_g : array_like
        Base acceleration, uniformly sampled. [g]
    dt_s : float
        Sample step. [s]
    fn_hz : array_like
        Natural frequencies. [Hz]
    method : {"ramp", "cubic", "bandlimited", "auto"}
        Input model of the ERS, as in :func:`ers_shock`. [unitless]

    Returns
    -------
    tuple of str
        The warning texts, as ers_shock words them.
    """
    from qualplan.dynamics import sdof_filter
    from qualplan.dynamics import srs as srs_mod

    x = v.as_1d_float("accel_g", accel_g, min_size=2)
    fn, _, dt = sdof_filter.check_inputs(fn_hz, 10.0, dt_s)
    return tuple(t for t in srs_mod._accuracy_warnings(x, fn, dt, method)
                 if not t.startswith("primary spectrum"))


def ers_shock(accel_g, dt_s: float, fn_hz, q: float = 10.0, *,
              output: Literal["pseudo_accel", "abs_accel"] = "pseudo_accel",
              method: str = "ramp") -> np.ndarray:
    """ERS of a shock or any transient time history: the maximax SRS.

    Parameters
    ----------
    accel_g : array_like
        Base acceleration, uniformly sampled. [g]
    dt_s : float
        Sample step. [s]
    fn_hz : array_like
        Natural frequencies, below Nyquist. [Hz]
    q : float
        Amplification factor, > 0.5 (default 10). [unitless]
    output : {"pseudo_accel", "abs_accel"}
        "pseudo_accel" (default, the convention shared with the random and sine
        ERS and all FDS): wn^2 max|z| / g0 over the record and its residual
        free decay; "abs_accel": the absolute-acceleration maximax SRS (differs
        from the former by about 1/(2Q) near and above fn).
    method : {"ramp", "cubic", "bandlimited", "auto"}
        Input model and peak search of :func:`qualplan.dynamics.srs.srs`
        (default "ramp"; "bandlimited" and "auto" are within 2 % up to fs/5 on
        smooth records, "auto" also within 0.5 % on pulses with steps or kinks,
        docs/methods/between-samples.md). [unitless]

    Returns
    -------
    numpy.ndarray
        Maximax SRS. [g]

    Notes
    -----
    Computed by :mod:`qualplan.dynamics.srs` (Smallwood's ramp-invariant
    filters, residual free decay of one damped period).
    """
    from qualplan.dynamics import srs as srs_mod

    if output == "abs_accel":
        return srs_mod.srs(accel_g, dt_s, fn_hz, q, kind="maximax", method=method)
    if output != "pseudo_accel":
        raise InputError("output", output, "must be 'pseudo_accel' or 'abs_accel'")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        pv = srs_mod.pseudo_velocity_srs(accel_g, dt_s, fn_hz, q, method=method)
    for w in caught:
        warnings.warn(str(w.message), AccuracyWarning, stacklevel=2)
    fn = np.asarray(fn_hz, float)
    return pv * 2.0 * np.pi * fn / G0_M_S2
