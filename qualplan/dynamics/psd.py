"""Random-vibration PSD breakpoint profiles.

An acceleration spectral density (ASD, one-sided, g^2/Hz) given by breakpoints
and interpolated linearly in log-log axes between them (a constant dB/oct slope
per segment). Outside its band a profile is 0 g^2/Hz.

Functions by topic
------------------
- values and slopes: :func:`asd_at`, :func:`slopes_db_per_oct`, :func:`exponents`
- integrals (exact, closed form): :func:`grms`, :func:`segment_mean_square_g2`,
  :func:`segment_grms`, :func:`velocity_rms_m_s`, :func:`displacement_rms_m`,
  :func:`shaker_demand`
- scaling: :func:`scale_db`, :func:`scale_to_grms`
- construction: :func:`from_slopes`, :func:`from_plateau`, :func:`resample`
- combination: :func:`envelope`, :func:`simplify`, :func:`simplify_report`
- judging an achieved PSD: :func:`check_against`
- a frozen value type: :class:`PsdProfile`

See docs/methods/psd.md for formulas, conventions and check values.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from qualplan.dynamics import _loglog
from qualplan.dynamics.errors import InputError
from qualplan.dynamics.units import G0_M_S2

__all__ = [
    "PsdProfile",
    "asd_at",
    "check_psd",
    "exponents",
    "slopes_db_per_oct",
    "grms",
    "segment_mean_square_g2",
    "segment_grms",
    "velocity_rms_m_s",
    "displacement_rms_m",
    "ShakerDemand",
    "shaker_demand",
    "scale_db",
    "scale_to_grms",
    "from_slopes",
    "from_plateau",
    "resample",
    "envelope",
]


def check_psd(freq_hz, asd_g2_hz):
    """Validate PSD breakpoints; return float64 copies.

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz]: at least 2, finite, > 0, strictly increasing.
    asd_g2_hz : array_like
        ASD at the breakpoints [g^2/Hz]: finite, > 0, same length.

    Returns
    -------
    freq_hz, asd_g2_hz : ndarray

    Raises
    ------
    InputError
        Naming the field (``freq_hz[i]`` / ``asd_g2_hz[i]``), the value and the rule.
    """
    return _loglog.check_profile(freq_hz, asd_g2_hz, "freq_hz", "asd_g2_hz")


def asd_at(freq_hz, asd_g2_hz, f):
    """ASD of a breakpoint profile at any frequency.

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz].
    asd_g2_hz : array_like
        Breakpoint ASD [g^2/Hz].
    f : float or array_like
        Frequencies [Hz].

    Returns
    -------
    float or ndarray
        ASD [g^2/Hz], log-log interpolated; 0.0 outside the band.

    Notes
    -----
    ``G(f) = G_i (f/f_i)^n_i``, ``n_i = ln(G_{i+1}/G_i)/ln(f_{i+1}/f_i)``.

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    return _loglog.interp(fp, ap, f)


def exponents(freq_hz, asd_g2_hz) -> np.ndarray:
    """Log-log exponent n of every segment [unitless] (``G ~ f^n``)."""
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    return _loglog._exponents(fp, ap)


def slopes_db_per_oct(freq_hz, asd_g2_hz) -> np.ndarray:
    """Slope of every segment [dB/oct]: ``10 log10(G2/G1) / log2(f2/f1)`` (= 3.0103 n)."""
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    return _loglog.slopes_db_per_oct(fp, ap, power=True)


def segment_mean_square_g2(freq_hz, asd_g2_hz) -> np.ndarray:
    """Exact area (mean square) of every segment.

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz].
    asd_g2_hz : array_like
        Breakpoint ASD [g^2/Hz].

    Returns
    -------
    ndarray
        ``A_i`` [g^2], one per segment.

    Notes
    -----
    ``A = (G2 f2 - G1 f1)/(n + 1)`` for ``n != -1`` and ``A = G1 f1 ln(f2/f1)`` for
    ``n = -1`` (-3.0103 dB/oct). Evaluated as ``G1 f1 L exprel((n+1) L)``,
    ``L = ln(f2/f1)``, which is both formulas at once and continuous at n = -1.

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed., random vibration chapter;
    Lalanne, Mechanical Vibration and Shock Analysis, vol. 3.
    """
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    return _loglog._segment_integrals(fp, ap, 0.0)


def segment_grms(freq_hz, asd_g2_hz) -> np.ndarray:
    """g rms of every segment on its own [g]: ``sqrt(A_i)``."""
    return np.sqrt(segment_mean_square_g2(freq_hz, asd_g2_hz))


def grms(freq_hz, asd_g2_hz) -> float:
    """Overall g rms of a PSD breakpoint profile, exact.

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz].
    asd_g2_hz : array_like
        Breakpoint ASD [g^2/Hz].

    Returns
    -------
    float
        ``sqrt(sum_i A_i)`` [g], see :func:`segment_mean_square_g2`.

    Examples
    --------
    GSFC-STD-7000 component qualification level (printed 14.1 g rms):

    >>> round(grms([20, 50, 800, 2000], [0.026, 0.16, 0.16, 0.026]), 4)
    14.1356

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed., random vibration chapter.
    """
    return math.sqrt(float(np.sum(segment_mean_square_g2(freq_hz, asd_g2_hz))))


def velocity_rms_m_s(freq_hz, asd_g2_hz) -> float:
    """rms velocity of an acceleration PSD [m/s].

    Notes
    -----
    ``v_rms^2 = g0^2 int G(f) / (2 pi f)^2 df``, exact per segment (moment k = -2;
    a +3.0103 dB/oct segment is the log case there). g0 = 9.80665 m/s^2.
    """
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    m = float(np.sum(_loglog._segment_integrals(fp, ap, -2.0)))
    return G0_M_S2 * math.sqrt(m) / (2.0 * math.pi)


def displacement_rms_m(freq_hz, asd_g2_hz) -> float:
    """rms displacement of an acceleration PSD [m].

    Notes
    -----
    ``d_rms^2 = g0^2 int G(f) / (2 pi f)^4 df``, exact per segment (moment k = -4).
    """
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    m = float(np.sum(_loglog._segment_integrals(fp, ap, -4.0)))
    return G0_M_S2 * math.sqrt(m) / (2.0 * math.pi) ** 2


@dataclass(frozen=True)
class ShakerDemand:
    """Acceleration, velocity and displacement a PSD asks of a shaker.

    Attributes
    ----------
    grms : float
        Overall acceleration rms [g].
    accel_peak_g : float
        ``sigma * grms`` [g].
    velocity_rms_m_s, velocity_peak_m_s : float
        rms and ``sigma * rms`` velocity [m/s].
    displacement_rms_m, displacement_peak_m, displacement_pk_pk_m : float
        rms, ``sigma * rms`` and ``2 sigma * rms`` displacement [m] (stroke).
    sigma : float
        Clipping level of the drive [multiples of rms], 3 by default.
    """

    grms: float
    accel_peak_g: float
    velocity_rms_m_s: float
    velocity_peak_m_s: float
    displacement_rms_m: float
    displacement_peak_m: float
    displacement_pk_pk_m: float
    sigma: float


def shaker_demand(freq_hz, asd_g2_hz, *, sigma: float = 3.0) -> ShakerDemand:
    """Peak acceleration, velocity and stroke of a PSD for shaker limits.

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Breakpoints [Hz], [g^2/Hz].
    sigma : float
        Peak factor [multiples of rms]; controllers typically clip drive at 3 sigma.

    Returns
    -------
    ShakerDemand
        Peak = sigma x rms, peak-to-peak displacement = 2 sigma x d_rms (6 d_rms by default).

    References
    ----------
    Common practice (compare 6 d_rms with the shaker's peak-to-peak stroke).
    """
    if not (isinstance(sigma, int | float) and math.isfinite(sigma) and sigma > 0):
        raise InputError("sigma", sigma, "must be a finite number > 0")
    g = grms(freq_hz, asd_g2_hz)
    v = velocity_rms_m_s(freq_hz, asd_g2_hz)
    d = displacement_rms_m(freq_hz, asd_g2_hz)
    return ShakerDemand(
        grms=g, accel_peak_g=sigma * g,
        velocity_rms_m_s=v, velocity_peak_m_s=sigma * v,
        displacement_rms_m=d, displacement_peak_m=sigma * d,
        displacement_pk_pk_m=2.0 * sigma * d, sigma=float(sigma),
    )


def _finite(field_name: str, value) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError) as exc:
        raise InputError(field_name, value, "must be a number") from exc
    if not math.isfinite(x):
        raise InputError(field_name, value, "must be finite")
    return x


def scale_db(freq_hz, asd_g2_hz, db: float):
    """Scale a PSD by a level in dB.

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Breakpoints [Hz], [g^2/Hz].
    db : float
        Level change [dB] on power: ASD x 10^(dB/10) (g rms x 10^(dB/20)).

    Returns
    -------
    freq_hz, asd_g2_hz : ndarray
    """
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    return fp, ap * 10.0 ** (_finite("db", db) / 10.0)


def scale_to_grms(freq_hz, asd_g2_hz, target_grms: float):
    """Scale a PSD (same shape) to a target overall g rms.

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Breakpoints [Hz], [g^2/Hz].
    target_grms : float
        Wanted overall rms [g], > 0.

    Returns
    -------
    freq_hz, asd_g2_hz : ndarray
        ASD x (target/grms)^2.
    """
    t = _finite("target_grms", target_grms)
    if t <= 0:
        raise InputError("target_grms", target_grms, "must be > 0")
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    return fp, ap * (t / grms(fp, ap)) ** 2


def from_slopes(freq_edges_hz, start_asd_g2_hz: float, slopes_db_oct):
    """PSD breakpoints from a start level and a slope per band.

    Parameters
    ----------
    freq_edges_hz : array_like
        Band edges [Hz], k + 1 values.
    start_asd_g2_hz : float
        ASD at the first edge [g^2/Hz].
    slopes_db_oct : array_like
        k slopes [dB/oct] (0 = plateau); 3.0103 dB/oct per unit log-log exponent.

    Returns
    -------
    freq_hz, asd_g2_hz : ndarray
    """
    return _loglog.from_slopes(freq_edges_hz, start_asd_g2_hz, slopes_db_oct, power=True)


def from_plateau(plateau_asd_g2_hz: float, plateau_hz, *, low_hz=None, low_slope_db_oct=None,
                 high_hz=None, high_slope_db_oct=None):
    """PSD breakpoints the way specifications print them: plateau with sloped skirts.

    E.g. GSFC-STD-7000 "20 Hz +6 dB/oct, 50-800 Hz 0.16 g^2/Hz, -6 dB/oct to 2000 Hz":
    ``from_plateau(0.16, (50, 800), low_hz=20, low_slope_db_oct=6, high_hz=2000,
    high_slope_db_oct=-6)``.

    Parameters
    ----------
    plateau_asd_g2_hz : float
        Plateau level [g^2/Hz].
    plateau_hz : (float, float)
        Plateau band [Hz].
    low_hz, low_slope_db_oct : float, optional
        Lowest frequency [Hz] and the slope rising from it to the plateau [dB/oct]
        (positive = rising with frequency). Both or neither.
    high_hz, high_slope_db_oct : float, optional
        Highest frequency [Hz] and the slope from the plateau to it [dB/oct]
        (negative = falling). Both or neither.

    Returns
    -------
    freq_hz, asd_g2_hz : ndarray
        The levels at the skirt ends are ``G_p 10^(-s log2(f_a/f_lo)/10)`` and
        ``G_p 10^(s log2(f_hi/f_b)/10)``.
    """
    p = _finite("plateau_asd_g2_hz", plateau_asd_g2_hz)
    if p <= 0:
        raise InputError("plateau_asd_g2_hz", plateau_asd_g2_hz, "must be > 0")
    try:
        fa, fb = (float(x) for x in plateau_hz)
    except (TypeError, ValueError) as exc:
        raise InputError(
            "plateau_hz", plateau_hz, "must be two frequencies (f_start, f_end)"
        ) from exc
    if not (0 < fa < fb and math.isfinite(fb)):
        raise InputError("plateau_hz", plateau_hz, "must satisfy 0 < f_start < f_end")
    f = [fa, fb]
    a = [p, p]
    if (low_hz is None) != (low_slope_db_oct is None):
        raise InputError("low_slope_db_oct", low_slope_db_oct, "give low_hz and its slope together")
    if (high_hz is None) != (high_slope_db_oct is None):
        raise InputError("high_slope_db_oct", high_slope_db_oct,
                         "give high_hz and its slope together")
    if low_hz is not None:
        flo = _finite("low_hz", low_hz)
        if not 0 < flo < fa:
            raise InputError("low_hz", low_hz, f"must be > 0 and below the plateau start {fa:g}")
        s = _finite("low_slope_db_oct", low_slope_db_oct)
        f.insert(0, flo)
        a.insert(0, p * 10.0 ** (-s * math.log2(fa / flo) / 10.0))
    if high_hz is not None:
        fhi = _finite("high_hz", high_hz)
        if not fhi > fb:
            raise InputError("high_hz", high_hz, f"must be above the plateau end {fb:g}")
        s = _finite("high_slope_db_oct", high_slope_db_oct)
        f.append(fhi)
        a.append(p * 10.0 ** (s * math.log2(fhi / fb) / 10.0))
    return check_psd(f, a)


def resample(freq_hz, asd_g2_hz, freq_grid_hz) -> np.ndarray:
    """ASD of a profile on a frequency grid (log-log; 0 outside the band).

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Breakpoints [Hz], [g^2/Hz].
    freq_grid_hz : array_like
        Grid [Hz], finite.

    Returns
    -------
    ndarray
        ASD on the grid [g^2/Hz].
    """
    from qualplan.dynamics._validate import as_1d_float

    grid = as_1d_float("freq_grid_hz", freq_grid_hz)
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    return _loglog._interp(fp, ap, grid)


def envelope(profiles: Sequence) -> tuple[np.ndarray, np.ndarray]:
    """Exact maximum envelope of PSD profiles.

    Parameters
    ----------
    profiles : list of (freq_hz, asd_g2_hz) pairs
        Breakpoint profiles [Hz], [g^2/Hz] (or :class:`PsdProfile`).

    Returns
    -------
    freq_hz, asd_g2_hz : ndarray
        The maximum at every frequency, with new breakpoints where log-log
        segments cross; over the union of the bands (a step at an inner band
        edge is drawn over a relative width of 1e-6 on the outer side).

    Notes
    -----
    Exact, not sampled: see ``docs/methods/psd.md``, "Envelope".
    """
    if isinstance(profiles, PsdProfile):
        profiles = [profiles]
    pairs = [(p.freq_hz, p.asd_g2_hz) if isinstance(p, PsdProfile) else p for p in profiles]
    return _loglog.envelope(pairs)


@dataclass(frozen=True, eq=False)
class PsdProfile:
    """A PSD breakpoint profile (immutable, validated).

    Attributes
    ----------
    freq_hz : ndarray
        Breakpoint frequencies [Hz], strictly increasing, > 0 (read-only array).
    asd_g2_hz : ndarray
        ASD [g^2/Hz], > 0 (read-only array).
    """

    freq_hz: np.ndarray
    asd_g2_hz: np.ndarray
    _hash: int = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        f, a = check_psd(self.freq_hz, self.asd_g2_hz)
        f.flags.writeable = False
        a.flags.writeable = False
        object.__setattr__(self, "freq_hz", f)
        object.__setattr__(self, "asd_g2_hz", a)
        object.__setattr__(self, "_hash", hash((f.tobytes(), a.tobytes())))

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, PsdProfile):
            return NotImplemented
        return bool(np.array_equal(self.freq_hz, other.freq_hz)
                    and np.array_equal(self.asd_g2_hz, other.asd_g2_hz))

    def __hash__(self) -> int:
        return self._hash

    def __iter__(self):
        """Unpack as ``freq_hz, asd_g2_hz = profile``."""
        return iter((self.freq_hz, self.asd_g2_hz))

    def __len__(self) -> int:
        return 2

    @property
    def grms(self) -> float:
        """Overall g rms [g]."""
        return grms(self.freq_hz, self.asd_g2_hz)

    def asd_at(self, f):
        """ASD at `f` [Hz] -> [g^2/Hz]; 0 outside the band."""
        return _loglog.interp(self.freq_hz, self.asd_g2_hz, f)

    def slopes_db_per_oct(self) -> np.ndarray:
        """Segment slopes [dB/oct]."""
        return slopes_db_per_oct(self.freq_hz, self.asd_g2_hz)

    def scaled_db(self, db: float) -> PsdProfile:
        """Copy scaled by `db` [dB on power]."""
        return PsdProfile(*scale_db(self.freq_hz, self.asd_g2_hz, db))

    def scaled_to_grms(self, target_grms: float) -> PsdProfile:
        """Copy of the same shape with overall rms `target_grms` [g]."""
        return PsdProfile(*scale_to_grms(self.freq_hz, self.asd_g2_hz, target_grms))

    def velocity_rms_m_s(self) -> float:
        """rms velocity [m/s]."""
        return velocity_rms_m_s(self.freq_hz, self.asd_g2_hz)

    def displacement_rms_m(self) -> float:
        """rms displacement [m]."""
        return displacement_rms_m(self.freq_hz, self.asd_g2_hz)

