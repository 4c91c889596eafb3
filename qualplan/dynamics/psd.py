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
from qualplan.dynamics._validate import as_1d_float, strictly_increasing
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
    "simplify",
    "simplify_report",
    "SimplifyResult",
    "check_against",
    "tolerance_band",
    "ToleranceCheck",
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

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
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
    """Log-log exponent n of every segment (``G ~ f^n``).

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz].
    asd_g2_hz : array_like
        Breakpoint ASD [g^2/Hz].

    Returns
    -------
    ndarray
        ``n_i = ln(G_{i+1}/G_i) / ln(f_{i+1}/f_i)`` [unitless], one per segment.

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    return _loglog._exponents(fp, ap)


def slopes_db_per_oct(freq_hz, asd_g2_hz) -> np.ndarray:
    """Slope of every segment in dB per octave.

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz].
    asd_g2_hz : array_like
        Breakpoint ASD [g^2/Hz].

    Returns
    -------
    ndarray
        ``10 log10(G2/G1) / log2(f2/f1)`` [dB/oct] (= 3.0103 n, exact 10 log10 2 per unit
        exponent).

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
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
    """g rms of every segment on its own.

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz].
    asd_g2_hz : array_like
        Breakpoint ASD [g^2/Hz].

    Returns
    -------
    ndarray
        ``sqrt(A_i)`` [g], A_i from :func:`segment_mean_square_g2`.

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
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
    """rms velocity of an acceleration PSD.

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz].
    asd_g2_hz : array_like
        Breakpoint ASD [g^2/Hz].

    Returns
    -------
    float
        Velocity rms [m/s].

    Notes
    -----
    ``v_rms^2 = g0^2 int G(f) / (2 pi f)^2 df``, exact per segment (moment k = -2;
    a +3.0103 dB/oct segment is the log case there). g0 = 9.80665 m/s^2.

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    m = float(np.sum(_loglog._segment_integrals(fp, ap, -2.0)))
    return G0_M_S2 * math.sqrt(m) / (2.0 * math.pi)


def displacement_rms_m(freq_hz, asd_g2_hz) -> float:
    """rms displacement of an acceleration PSD.

    Parameters
    ----------
    freq_hz : array_like
        Breakpoint frequencies [Hz].
    asd_g2_hz : array_like
        Breakpoint ASD [g^2/Hz].

    Returns
    -------
    float
        Displacement rms [m]; 3 x and 6 x this are the 3-sigma peak and the
        peak-to-peak stroke (:func:`shaker_demand`).

    Notes
    -----
    ``d_rms^2 = g0^2 int G(f) / (2 pi f)^4 df``, exact per segment (moment k = -4).

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
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

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
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

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
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

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
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

    References
    ----------
    GSFC-STD-7000A/B (GEVS), Table 2.4-3 (the way component levels are printed).
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

    References
    ----------
    Harris' Shock and Vibration Handbook, 6th ed. (Piersol & Paez, 2010), random vibration.
    """
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

    References
    ----------
    Own method (exact log-log crossings), docs/methods/psd.md "Envelope".
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



# ---------------------------------------------------------------------------------------------
# Conservative simplification
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class SimplifyResult:
    """A conservative simplification and what it costs.

    Attributes
    ----------
    freq_hz, asd_g2_hz : ndarray
        Breakpoints of the simplified profile [Hz], [g^2/Hz].
    grms_input : float
        g rms of the input (log-log interpolated between its lines) [g].
    grms_result : float
        g rms of the simplified profile [g].
    excess_db : float
        ``20 log10(grms_result / grms_input)`` [dB] (>= 0).
    max_points : int
        Breakpoint budget asked for.
    min_margin_db : float
        Smallest ``10 log10(result / input)`` over the input frequencies [dB] (>= 0:
        the result is never below the input).
    """

    freq_hz: np.ndarray
    asd_g2_hz: np.ndarray
    grms_input: float
    grms_result: float
    excess_db: float
    max_points: int
    min_margin_db: float


def simplify_report(freq_hz, asd_g2_hz, max_points: int) -> SimplifyResult:
    """Conservative simplification to at most `max_points` breakpoints, with its g rms excess.

    Parameters
    ----------
    freq_hz : array_like
        Input frequencies [Hz] (breakpoints, or the lines of a measured PSD/envelope).
    asd_g2_hz : array_like
        Input ASD [g^2/Hz], > 0.
    max_points : int
        Largest number of breakpoints of the result, >= 2.

    Returns
    -------
    SimplifyResult
        Breakpoints at input frequencies, spanning the input band, never below the
        input at any input frequency, with a small g rms excess.

    Notes
    -----
    Minimises the area ``int G(f) df`` of a log-log profile constrained above the
    data: dynamic programming over (candidate frequency, candidate level) states with
    exact segment areas, joint convex re-optimisation of the breakpoint values (SLSQP
    on the upper convex hull constraints), then local moves of single breakpoints.
    A heuristic search of an exact model, not a proof of global optimality; see
    docs/methods/psd.md, "Simplification", for the design and measured optimality gaps.

    References
    ----------
    Own method, docs/methods/psd.md "Simplification"; envelope practice of
    NASA-HDBK-7005 (straight-line log-log enveloping that stays above the data).
    """
    fp, ap = check_psd(freq_hz, asd_g2_hz)
    fo, ao = _loglog.simplify_above(fp, ap, max_points)
    g_in = grms(fp, ap)
    g_out = grms(fo, ao)
    margin = float(np.min(_loglog._interp(fo, ao, fp) / ap))
    return SimplifyResult(
        freq_hz=fo, asd_g2_hz=ao, grms_input=g_in, grms_result=g_out,
        excess_db=20.0 * math.log10(g_out / g_in), max_points=int(max_points),
        min_margin_db=10.0 * math.log10(margin),
    )


def simplify(freq_hz, asd_g2_hz, max_points: int) -> tuple[np.ndarray, np.ndarray]:
    """Conservative simplification of a PSD (or an envelope) to at most `max_points` breakpoints.

    Parameters
    ----------
    freq_hz : array_like
        Input frequencies [Hz].
    asd_g2_hz : array_like
        Input ASD [g^2/Hz].
    max_points : int
        Largest number of breakpoints, >= 2.

    Returns
    -------
    freq_hz, asd_g2_hz : ndarray
        Never below the input at any input frequency; see :func:`simplify_report` for the
        g rms excess and the method.

    References
    ----------
    Own method, docs/methods/psd.md "Simplification".
    """
    r = simplify_report(freq_hz, asd_g2_hz, max_points)
    return r.freq_hz, r.asd_g2_hz


# ---------------------------------------------------------------------------------------------
# Achieved PSD against a specified profile
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class ToleranceCheck:
    """Result of :func:`check_against`.

    Attributes
    ----------
    freq_hz : ndarray
        Lines judged (achieved lines inside the specification band) [Hz].
    achieved_asd_g2_hz, spec_asd_g2_hz : ndarray
        Achieved and specified ASD on those lines [g^2/Hz].
    deviation_db : ndarray
        ``10 log10(achieved / spec)`` [dB].
    lower_db, upper_db : ndarray
        Tolerance band on each line [dB] (e.g. -3 and +3).
    line_pass : ndarray of bool
        ``lower_db <= deviation_db <= upper_db``.
    worst_freq_hz : float
        Line with the largest violation (or, if all pass, the smallest margin) [Hz].
    worst_deviation_db : float
        Deviation on that line [dB].
    worst_excess_db : float
        How far outside its band that line is [dB] (<= 0 when it is inside).
    grms_achieved, grms_spec : float
        Overall rms over the judged band [g] (achieved: trapezoid over the lines;
        specification: exact closed form over the same band).
    grms_deviation_db : float
        ``20 log10(grms_achieved / grms_spec)`` [dB].
    grms_pass : bool
        g rms within ``+/- grms_tol_pct`` percent.
    fraction_in_tolerance : float
        Share of judged lines inside their band [unitless].
    passed : bool
        Every line inside its band and the g rms inside its tolerance.
    n_outside_band : int
        Achieved lines outside the specification band (not judged).
    """

    freq_hz: np.ndarray
    achieved_asd_g2_hz: np.ndarray
    spec_asd_g2_hz: np.ndarray
    deviation_db: np.ndarray
    lower_db: np.ndarray
    upper_db: np.ndarray
    line_pass: np.ndarray
    worst_freq_hz: float
    worst_deviation_db: float
    worst_excess_db: float
    grms_achieved: float
    grms_spec: float
    grms_deviation_db: float
    grms_pass: bool
    fraction_in_tolerance: float
    passed: bool
    n_outside_band: int


def _tolerance_bands(tol_db, f: np.ndarray):
    """Lower/upper band in dB per line from a scalar, a pair or a list of bands."""
    if isinstance(tol_db, int | float) and not isinstance(tol_db, bool):
        t = _finite("tol_db", tol_db)
        if t <= 0:
            raise InputError("tol_db", tol_db, "must be > 0 (a symmetric +/- band in dB)")
        return np.full(f.size, -t), np.full(f.size, t)
    try:
        items = list(tol_db)
    except TypeError as exc:
        raise InputError("tol_db", tol_db, "must be a number, (lower, upper) or bands") from exc
    if len(items) == 2 and all(isinstance(v, int | float) for v in items):
        lo, hi = _finite("tol_db[0]", items[0]), _finite("tol_db[1]", items[1])
        if not lo < 0 < hi:
            raise InputError("tol_db", tol_db, "needs lower < 0 < upper, e.g. (-3, 3)")
        return np.full(f.size, lo), np.full(f.size, hi)
    lower = np.full(f.size, np.nan)
    upper = np.full(f.size, np.nan)
    for i, band in enumerate(items):
        try:
            f1, f2, lo, hi = (float(v) for v in band)
        except (TypeError, ValueError) as exc:
            raise InputError(f"tol_db[{i}]", band,
                             "must be (f_low_hz, f_high_hz, lower_db, upper_db)") from exc
        if not (0 <= f1 < f2 and lo < 0 < hi):
            raise InputError(f"tol_db[{i}]", band, "needs f_low < f_high and lower < 0 < upper")
        m = (f >= f1) & (f <= f2)
        lower[m] = lo  # later bands override earlier ones on shared lines
        upper[m] = hi
    if np.isnan(lower).any():
        i = int(np.argmax(np.isnan(lower)))
        raise InputError("tol_db", f"no band covers {f[i]:g} Hz",
                         "the bands must cover the whole specification band")
    return lower, upper


def tolerance_band(asd_g2_hz, tol_db: float) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper tolerance limits of a specified ASD at its own lines.

    Parameters
    ----------
    asd_g2_hz : array_like
        Specified ASD at its breakpoints or lines [g^2/Hz], > 0.
    tol_db : float
        Symmetric band half-width, > 0 [dB, power: 10 log10 of an ASD ratio].

    Returns
    -------
    lower, upper : numpy.ndarray
        ``asd x 10^(-tol_db/10)`` and ``asd x 10^(tol_db/10)`` [g^2/Hz]. Straight lines
        between breakpoints in log-log, as the profile itself.

    References
    ----------
    ASD tolerances in dB as in MIL-STD-810H Method 514.8 (+/-3 dB typical) and
    GSFC-STD-7000; the check of achieved lines is :func:`check_against`.
    """
    a = as_1d_float("asd_g2_hz", asd_g2_hz)
    if not np.all(a > 0):
        raise InputError("asd_g2_hz", a[~(a > 0)][0], "must be > 0 g^2/Hz")
    t = _finite("tol_db", tol_db)
    if t <= 0:
        raise InputError("tol_db", tol_db, "must be > 0 (a symmetric +/- band in dB)")
    return a * 10.0 ** (-t / 10.0), a * 10.0 ** (t / 10.0)


def check_against(freq_hz, asd_g2_hz, spec_freq_hz, spec_asd_g2_hz, *, tol_db=3.0,
                  grms_tol_pct: float = 10.0) -> ToleranceCheck:
    """Judge an achieved PSD (e.g. a controller's lines) against a specified profile.

    Parameters
    ----------
    freq_hz : array_like
        Achieved lines [Hz], strictly increasing.
    asd_g2_hz : array_like
        Achieved ASD [g^2/Hz], >= 0 (a zero line is -inf dB: a failure).
    spec_freq_hz, spec_asd_g2_hz : array_like
        Specified profile breakpoints [Hz], [g^2/Hz].
    tol_db : float, (float, float) or list of (f_low_hz, f_high_hz, lower_db, upper_db)
        Tolerance on every line [dB]: ``3`` means +/-3 dB; ``(-1.5, 3)`` an asymmetric
        band; a list gives bands per frequency range (later entries win where they
        overlap), e.g. ``[(20, 500, -3, 3), (500, 2000, -6, 6)]``.
    grms_tol_pct : float
        Allowed deviation of the overall g rms [percent of the specified g rms].

    Returns
    -------
    ToleranceCheck

    Notes
    -----
    Only lines inside ``[spec_freq_hz[0], spec_freq_hz[-1]]`` are judged. The achieved
    g rms integrates the judged lines with the trapezoid rule; the specified g rms is
    the exact area of the profile between the first and last judged line.

    References
    ----------
    Tolerances as in GSFC-STD-7000 / NASA-STD-7001 / IEC 60068-2-64 practice
    (+/-3 dB on ASD, +/-10 % on g rms); the defaults are common practice, not a rule.
    """
    fa = as_1d_float("freq_hz", freq_hz, min_size=2)
    aa = as_1d_float("asd_g2_hz", asd_g2_hz, min_size=2)
    if fa.shape != aa.shape:
        raise InputError("asd_g2_hz", f"{aa.size} values", f"must match freq_hz ({fa.size})")
    strictly_increasing("freq_hz", fa)
    if (aa < 0).any():
        i = int(np.argmax(aa < 0))
        raise InputError(f"asd_g2_hz[{i}]", float(aa[i]), "must be >= 0")
    fs_, as_ = check_psd(spec_freq_hz, spec_asd_g2_hz)
    pct = _finite("grms_tol_pct", grms_tol_pct)
    if pct <= 0:
        raise InputError("grms_tol_pct", grms_tol_pct, "must be > 0")
    inside = (fa >= fs_[0]) & (fa <= fs_[-1])
    if inside.sum() < 2:
        raise InputError("freq_hz", f"{int(inside.sum())} lines in the specification band",
                         f"needs at least 2 lines within {fs_[0]:g}-{fs_[-1]:g} Hz")
    f = fa[inside]
    a = aa[inside]
    spec = _loglog._interp(fs_, as_, f)
    with np.errstate(divide="ignore"):
        dev = 10.0 * np.log10(a / spec)
    lower, upper = _tolerance_bands(tol_db, f)
    ok = (dev >= lower) & (dev <= upper)
    excess = np.maximum(lower - dev, dev - upper)  # > 0 outside, <= 0 inside
    w = int(np.argmax(excess))
    g_ach = math.sqrt(float(np.trapezoid(a, f)))
    band_f, band_a = _clip_profile(fs_, as_, f[0], f[-1])
    g_spec = grms(band_f, band_a)
    g_dev = 20.0 * math.log10(g_ach / g_spec) if g_ach > 0 else -math.inf
    g_ok = abs(g_ach / g_spec - 1.0) <= pct / 100.0
    return ToleranceCheck(
        freq_hz=f, achieved_asd_g2_hz=a, spec_asd_g2_hz=spec, deviation_db=dev,
        lower_db=lower, upper_db=upper, line_pass=ok,
        worst_freq_hz=float(f[w]), worst_deviation_db=float(dev[w]),
        worst_excess_db=float(excess[w]),
        grms_achieved=g_ach, grms_spec=g_spec, grms_deviation_db=g_dev, grms_pass=bool(g_ok),
        fraction_in_tolerance=float(ok.mean()), passed=bool(ok.all() and g_ok),
        n_outside_band=int((~inside).sum()),
    )


def _clip_profile(f: np.ndarray, a: np.ndarray, f_lo: float, f_hi: float):
    """The part of a validated profile between f_lo and f_hi (inside its band)."""
    keep = (f > f_lo) & (f < f_hi)
    ff = np.concatenate(([f_lo], f[keep], [f_hi]))
    aa = _loglog._interp(f, a, ff)
    if ff.size >= 2 and ff[0] < ff[-1]:
        return ff, aa
    raise InputError("freq_hz", (f_lo, f_hi), "band of zero width")
