"""Sine environments: swept-sine specifications, sweeps, dwells, envelopes, notching.

A sweep specification is a list of contiguous frequency bands, each holding a
constant displacement (peak or peak-to-peak, said explicitly), velocity (peak)
or acceleration (g peak). Between bands the amplitude law changes at the
crossover frequency, where the two laws give the same acceleration.

Amplitude relations (A in m/s^2): X_pk = A / (2 pi f)^2, V_pk = A / (2 pi f).

References
----------
.. [1] Harris' Shock and Vibration Handbook, 6th ed., 2010 (sinusoidal motion).
.. [2] IEC 60068-2-6, Environmental testing - Test Fc: Vibration (sinusoidal)
   (logarithmic sweeps in octaves per minute, sweep cycles up and down).
.. [3] C. Lalanne, Mechanical Vibration and Shock Analysis, vol. 1 "Sinusoidal
   Vibration", ISTE/Wiley, 2009 (sweep duration and cycle counts).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Literal

import numpy as np

from qualplan.dynamics import _loglog as _ll
from qualplan.dynamics import _validate as v
from qualplan.dynamics.errors import InputError
from qualplan.dynamics.units import G0_M_S2

__all__ = [
    "SineBand",
    "SineSpec",
    "SineTable",
    "Sweep",
    "SineDwell",
    "crossover_hz",
    "sine_spec",
    "sweep_time",
    "sweep_time_linear",
    "sweep_cycles",
    "sweep_cycles_linear",
    "envelope",
    "notch",
    "tolerance_band",
]

Quantity = Literal["displacement", "velocity", "acceleration"]
_LN2 = math.log(2.0)


def _rate(rate, field_name="rate_oct_per_min") -> float:
    try:
        r = float(rate)
    except (TypeError, ValueError) as exc:
        raise InputError(field_name, rate, "must be a number") from exc
    if not np.isfinite(r) or r <= 0:
        raise InputError(field_name, rate, "must be a finite sweep rate > 0 (a rate of zero "
                         "never leaves the start frequency: use a SineDwell)")
    return r


def _band_edges(f1_hz, f2_hz) -> tuple[float, float]:
    f1 = v.positive_scalar("f1_hz", f1_hz)
    f2 = v.positive_scalar("f2_hz", f2_hz)
    return f1, f2


def sweep_time(f1_hz: float, f2_hz: float, rate_oct_per_min: float) -> float:
    """Duration of one logarithmic sweep pass between two frequencies.

    Parameters
    ----------
    f1_hz, f2_hz : float
        Start and end frequencies (either order). [Hz]
    rate_oct_per_min : float
        Sweep rate, > 0. [oct/min]

    Returns
    -------
    float
        t = 60 |log2(f2 / f1)| / R. [s]

    Examples
    --------
    >>> round(sweep_time(5.0, 100.0, 2.0), 2)
    129.66
    """
    f1, f2 = _band_edges(f1_hz, f2_hz)
    return 60.0 * abs(math.log2(f2 / f1)) / _rate(rate_oct_per_min)


def sweep_time_linear(f1_hz: float, f2_hz: float, rate_hz_per_s: float) -> float:
    """Duration of one linear sweep pass: |f2 - f1| / r [s] (r in [Hz/s])."""
    f1, f2 = _band_edges(f1_hz, f2_hz)
    return abs(f2 - f1) / _rate(rate_hz_per_s, "rate_hz_per_s")


def sweep_cycles(f1_hz: float, f2_hz: float, rate_oct_per_min: float) -> float:
    """Cycles in one logarithmic sweep pass: N = 60 |f2 - f1| / (R ln 2) [cycles]."""
    f1, f2 = _band_edges(f1_hz, f2_hz)
    return 60.0 * abs(f2 - f1) / (_rate(rate_oct_per_min) * _LN2)


def sweep_cycles_linear(f1_hz: float, f2_hz: float, rate_hz_per_s: float) -> float:
    """Cycles in one linear sweep pass: N = |f2^2 - f1^2| / (2 r) [cycles]."""
    f1, f2 = _band_edges(f1_hz, f2_hz)
    return abs(f2 * f2 - f1 * f1) / (2.0 * _rate(rate_hz_per_s, "rate_hz_per_s"))


@dataclass(frozen=True)
class SineBand:
    """One band of a sweep specification with a constant amplitude.

    Attributes
    ----------
    f_lo_hz, f_hi_hz : float
        Band edges. [Hz]
    quantity : {"displacement", "velocity", "acceleration"}
        What is held constant in the band.
    amplitude : float
        The constant PEAK amplitude: [m] for displacement, [m/s] for velocity,
        [g] for acceleration. Build displacement bands with
        :meth:`displacement` to say whether the printed value is peak or
        peak-to-peak.
    """

    f_lo_hz: float
    f_hi_hz: float
    quantity: Quantity
    amplitude: float

    def __post_init__(self):
        lo = v.positive_scalar("f_lo_hz", self.f_lo_hz)
        hi = v.positive_scalar("f_hi_hz", self.f_hi_hz)
        if hi <= lo:
            raise InputError("f_hi_hz", self.f_hi_hz, f"must exceed f_lo_hz = {lo:g}")
        if self.quantity not in ("displacement", "velocity", "acceleration"):
            raise InputError("quantity", self.quantity,
                             "must be 'displacement', 'velocity' or 'acceleration'")
        v.positive_scalar("amplitude", self.amplitude)

    @classmethod
    def displacement(cls, f_lo_hz: float, f_hi_hz: float, value_m: float, *,
                     measure: Literal["peak", "peak_to_peak"]) -> SineBand:
        """Constant-displacement band; `measure` says how `value_m` [m] was printed."""
        if measure not in ("peak", "peak_to_peak"):
            raise InputError("measure", measure, "must be 'peak' or 'peak_to_peak'")
        x = v.positive_scalar("value_m", value_m)
        return cls(f_lo_hz, f_hi_hz, "displacement", x / 2.0 if measure == "peak_to_peak" else x)

    @classmethod
    def velocity(cls, f_lo_hz: float, f_hi_hz: float, peak_m_s: float) -> SineBand:
        """Constant-velocity band, peak velocity [m/s]."""
        return cls(f_lo_hz, f_hi_hz, "velocity", peak_m_s)

    @classmethod
    def acceleration(cls, f_lo_hz: float, f_hi_hz: float, peak_g: float) -> SineBand:
        """Constant-acceleration band, peak acceleration [g]."""
        return cls(f_lo_hz, f_hi_hz, "acceleration", peak_g)

    def accel_g(self, freq_hz) -> np.ndarray:
        """Peak acceleration of this band's law at `freq_hz` (not clipped to the band). [g]"""
        w = 2.0 * np.pi * np.asarray(freq_hz, float)
        if self.quantity == "acceleration":
            return np.full_like(w, self.amplitude)
        if self.quantity == "velocity":
            return self.amplitude * w / G0_M_S2
        return self.amplitude * w * w / G0_M_S2


def _law(quantity: str, amplitude: float) -> tuple[float, float]:
    """Acceleration law a(f) = c f^p [g] of a constant-amplitude quantity."""
    if quantity == "acceleration":
        return amplitude, 0.0
    if quantity == "velocity":
        return amplitude * 2.0 * np.pi / G0_M_S2, 1.0
    return amplitude * (2.0 * np.pi) ** 2 / G0_M_S2, 2.0


def crossover_hz(quantity_a: Quantity, amplitude_a: float,
                 quantity_b: Quantity, amplitude_b: float) -> float:
    """Frequency where two constant-amplitude laws give the same acceleration.

    Parameters
    ----------
    quantity_a, quantity_b : {"displacement", "velocity", "acceleration"}
        The two laws (different quantities).
    amplitude_a, amplitude_b : float
        Their PEAK amplitudes: [m], [m/s] or [g].

    Returns
    -------
    float
        Displacement X / acceleration A: f = sqrt(A g0 / X) / (2 pi); velocity
        V / acceleration: f = A g0 / (2 pi V); displacement / velocity:
        f = V / (2 pi X). [Hz]
    """
    if quantity_a == quantity_b:
        raise InputError("quantity_b", quantity_b, "must differ from quantity_a")
    ca, pa = _law(quantity_a, v.positive_scalar("amplitude_a", amplitude_a))
    cb, pb = _law(quantity_b, v.positive_scalar("amplitude_b", amplitude_b))
    return (cb / ca) ** (1.0 / (pa - pb))


@dataclass(frozen=True)
class SineSpec:
    """A swept-sine specification: contiguous constant-amplitude bands.

    Attributes
    ----------
    bands : tuple of SineBand
        Bands in increasing frequency, each starting where the previous ends.
    """

    bands: tuple[SineBand, ...]

    def __post_init__(self):
        if len(self.bands) == 0:
            raise InputError("bands", "0 bands", "needs at least one band")
        for i in range(1, len(self.bands)):
            a, b = self.bands[i - 1], self.bands[i]
            if not math.isclose(a.f_hi_hz, b.f_lo_hz, rel_tol=1e-9):
                raise InputError(f"bands[{i}].f_lo_hz", b.f_lo_hz,
                                 f"must equal the previous band's f_hi_hz = {a.f_hi_hz:g}")

    @property
    def f_lo_hz(self) -> float:
        """Lowest frequency. [Hz]"""
        return self.bands[0].f_lo_hz

    @property
    def f_hi_hz(self) -> float:
        """Highest frequency. [Hz]"""
        return self.bands[-1].f_hi_hz

    @property
    def breaks_hz(self) -> np.ndarray:
        """Band edges (including the crossovers). [Hz]"""
        return np.array([b.f_lo_hz for b in self.bands] + [self.f_hi_hz])

    def accel_g(self, freq_hz) -> np.ndarray:
        """Peak acceleration at any frequency, 0 outside the specification. [g]"""
        f = np.asarray(freq_hz, float)
        out = np.zeros_like(f)
        for i, b in enumerate(self.bands):
            last = i == len(self.bands) - 1
            m = (f >= b.f_lo_hz) & ((f <= b.f_hi_hz) if last else (f < b.f_hi_hz))
            out = np.where(m, b.accel_g(f), out)
        return out

    def displacement_m(self, freq_hz) -> np.ndarray:
        """Peak displacement at any frequency. [m]"""
        f = np.asarray(freq_hz, float)
        return self.accel_g(f) * G0_M_S2 / (2.0 * np.pi * f) ** 2

    def velocity_m_s(self, freq_hz) -> np.ndarray:
        """Peak velocity at any frequency. [m/s]"""
        f = np.asarray(freq_hz, float)
        return self.accel_g(f) * G0_M_S2 / (2.0 * np.pi * f)


def sine_spec(f_lo_hz: float, f_hi_hz: float,
              levels: list[tuple[Quantity, float]]) -> SineSpec:
    """Build a sweep specification from its levels; the crossovers are computed.

    Parameters
    ----------
    f_lo_hz, f_hi_hz : float
        Sweep band. [Hz]
    levels : list of (quantity, peak amplitude)
        Constant-amplitude laws in increasing-frequency order, e.g.
        ``[("displacement", 6.35e-3), ("acceleration", 1.0)]``; amplitudes are
        PEAK values in [m], [m/s] or [g] (halve a printed peak-to-peak
        displacement, or build bands with :meth:`SineBand.displacement`).

    Returns
    -------
    SineSpec
        Bands split at the crossover frequencies (each law must govern a
        non-empty part of the band).
    """
    lo = v.positive_scalar("f_lo_hz", f_lo_hz)
    hi = v.positive_scalar("f_hi_hz", f_hi_hz)
    if hi <= lo:
        raise InputError("f_hi_hz", f_hi_hz, f"must exceed f_lo_hz = {lo:g}")
    if not levels:
        raise InputError("levels", levels, "needs at least one level")
    edges = [lo]
    for i in range(1, len(levels)):
        fc = crossover_hz(levels[i - 1][0], levels[i - 1][1], levels[i][0], levels[i][1])
        if not edges[-1] < fc < hi:
            raise InputError(f"levels[{i}]", levels[i],
                             f"crossover at {fc:g} Hz falls outside ({edges[-1]:g}, {hi:g}) Hz")
        edges.append(fc)
    edges.append(hi)
    return SineSpec(tuple(SineBand(edges[i], edges[i + 1], q, a)
                          for i, (q, a) in enumerate(levels)))


@dataclass(frozen=True)
class SineTable:
    """A sine amplitude tabulated against frequency, log-log interpolated.

    Attributes
    ----------
    freq_hz : numpy.ndarray
        Strictly increasing frequencies. [Hz]
    accel_g_points : numpy.ndarray
        Peak acceleration at those frequencies, >= 0 (0 in a gap between
        enveloped specifications; log-log interpolation, linear next to a 0). [g]
    notes : tuple of str
        How the table was made (e.g. the notch depth).
    """

    freq_hz: np.ndarray
    accel_g_points: np.ndarray
    notes: tuple[str, ...] = field(default=())

    def __post_init__(self):
        f = v.as_1d_float("freq_hz", self.freq_hz, min_size=2)
        a = v.as_1d_float("accel_g_points", self.accel_g_points, min_size=2)
        v.all_positive("freq_hz", f)
        v.strictly_increasing("freq_hz", f)
        if a.size != f.size or (a < 0).any():
            raise InputError("accel_g_points", a, "must be >= 0, one per frequency")
        object.__setattr__(self, "freq_hz", f)
        object.__setattr__(self, "accel_g_points", a)

    @property
    def f_lo_hz(self) -> float:
        """Lowest frequency. [Hz]"""
        return float(self.freq_hz[0])

    @property
    def f_hi_hz(self) -> float:
        """Highest frequency. [Hz]"""
        return float(self.freq_hz[-1])

    @property
    def breaks_hz(self) -> np.ndarray:
        """Table frequencies (integration breakpoints). [Hz]"""
        return self.freq_hz

    def accel_g(self, freq_hz) -> np.ndarray:
        """Peak acceleration, log-log interpolated, 0 outside the table. [g]"""
        return _loglog(self.freq_hz, self.accel_g_points, np.asarray(freq_hz, float))


def _loglog(fx: np.ndarray, ax: np.ndarray, f: np.ndarray) -> np.ndarray:
    inside = (f >= fx[0]) & (f <= fx[-1])
    fc = np.clip(f, fx[0], fx[-1])
    with np.errstate(divide="ignore"):
        la = np.log(ax)
    pos = np.isfinite(la)
    if pos.all():
        return _ll._interp(fx, ax, f)
    else:  # zeros in the table: linear interpolation on those segments
        j = np.clip(np.searchsorted(fx, fc, side="right") - 1, 0, fx.size - 2)
        both = pos[j] & pos[j + 1]
        t = np.log(fc / fx[j]) / np.log(fx[j + 1] / fx[j])
        with np.errstate(invalid="ignore"):
            lg = np.exp(la[j] + t * (la[j + 1] - la[j]))
        lin = ax[j] + (ax[j + 1] - ax[j]) * (fc - fx[j]) / (fx[j + 1] - fx[j])
        val = np.where(both, lg, lin)
    return np.where(inside, val, 0.0)


@dataclass(frozen=True)
class Sweep:
    """A sine sweep: a specification swept between two frequencies.

    Attributes
    ----------
    spec : SineSpec or SineTable
        The amplitude against frequency.
    rate : float
        Sweep rate: [oct/min] for ``mode="log"``, [Hz/s] for ``mode="linear"``.
    mode : {"log", "linear"}
        Logarithmic (constant octaves per minute) or linear sweep.
    direction : {"up", "down", "up-down"}
        "up-down" makes each sweep cycle one up pass then one down pass
        (IEC 60068-2-6 usage).
    n_sweeps : int
        Number of sweeps (sweep cycles for "up-down"). >= 1.
    f1_hz, f2_hz : float or None
        Swept band; defaults to the whole specification.
    """

    spec: SineSpec | SineTable
    rate: float
    mode: Literal["log", "linear"] = "log"
    direction: Literal["up", "down", "up-down"] = "up"
    n_sweeps: int = 1
    f1_hz: float | None = None
    f2_hz: float | None = None

    def __post_init__(self):
        _rate(self.rate, "rate")
        if self.mode not in ("log", "linear"):
            raise InputError("mode", self.mode, "must be 'log' or 'linear'")
        if self.direction not in ("up", "down", "up-down"):
            raise InputError("direction", self.direction, "must be 'up', 'down' or 'up-down'")
        if int(self.n_sweeps) != self.n_sweeps or self.n_sweeps < 1:
            raise InputError("n_sweeps", self.n_sweeps, "must be a whole number >= 1")
        lo, hi = self.band_hz
        if not (self.spec.f_lo_hz <= lo < hi <= self.spec.f_hi_hz):
            raise InputError("f1_hz", (lo, hi), "swept band must lie inside the specification "
                             f"[{self.spec.f_lo_hz:g}, {self.spec.f_hi_hz:g}] Hz")

    @property
    def band_hz(self) -> tuple[float, float]:
        """(lowest, highest) swept frequency. [Hz]"""
        lo = self.spec.f_lo_hz if self.f1_hz is None else float(self.f1_hz)
        hi = self.spec.f_hi_hz if self.f2_hz is None else float(self.f2_hz)
        return lo, hi

    @property
    def passes(self) -> int:
        """One-way passes through the band: n_sweeps, doubled for "up-down"."""
        return int(self.n_sweeps) * (2 if self.direction == "up-down" else 1)

    def time_in_band_s(self, fa_hz: float, fb_hz: float) -> float:
        """Total time spent between two frequencies over all passes. [s]"""
        lo, hi = self.band_hz
        a, b = max(min(fa_hz, fb_hz), lo), min(max(fa_hz, fb_hz), hi)
        if b <= a:
            return 0.0
        one = (sweep_time(a, b, self.rate) if self.mode == "log"
               else sweep_time_linear(a, b, self.rate))
        return self.passes * one

    def cycles_in_band(self, fa_hz: float, fb_hz: float) -> float:
        """Total cycles between two frequencies over all passes. [cycles]"""
        lo, hi = self.band_hz
        a, b = max(min(fa_hz, fb_hz), lo), min(max(fa_hz, fb_hz), hi)
        if b <= a:
            return 0.0
        one = (sweep_cycles(a, b, self.rate) if self.mode == "log"
               else sweep_cycles_linear(a, b, self.rate))
        return self.passes * one

    @property
    def duration_s(self) -> float:
        """Total sweep time over all passes. [s]"""
        return self.time_in_band_s(*self.band_hz)

    @property
    def cycles(self) -> float:
        """Total number of cycles over all passes. [cycles]"""
        return self.cycles_in_band(*self.band_hz)

    def time_per_band_s(self) -> list[tuple[float, float, float]]:
        """(f_lo, f_hi, time [s]) for each specification band crossed by the sweep."""
        lo, hi = self.band_hz
        edges = self.spec.breaks_hz
        out = []
        for a, b in zip(edges[:-1], edges[1:], strict=True):
            t = self.time_in_band_s(a, b)
            if t > 0:
                out.append((max(a, lo), min(b, hi), t))
        return out

    def frequency_at(self, t_s) -> np.ndarray:
        """Instantaneous frequency of the first pass at time t from its start. [Hz]"""
        lo, hi = self.band_hz
        t = np.asarray(t_s, float)
        up = self.direction != "down"
        if self.mode == "log":
            k = self.rate / 60.0
            return lo * 2.0 ** (k * t) if up else hi * 2.0 ** (-k * t)
        return lo + self.rate * t if up else hi - self.rate * t


@dataclass(frozen=True)
class SineDwell:
    """A sine dwell: constant frequency and amplitude for a duration.

    Attributes
    ----------
    freq_hz : float
        Dwell frequency. [Hz]
    accel_g : float
        Peak acceleration. [g]
    duration_s : float
        Dwell time. [s]
    """

    freq_hz: float
    accel_g: float
    duration_s: float

    def __post_init__(self):
        v.positive_scalar("freq_hz", self.freq_hz)
        v.positive_scalar("accel_g", self.accel_g)
        v.positive_scalar("duration_s", self.duration_s)

    @property
    def cycles(self) -> float:
        """Number of cycles f T. [cycles]"""
        return self.freq_hz * self.duration_s


def envelope(specs, freq_hz=None) -> SineTable:
    """Envelope (maximum acceleration per frequency) of several sine specifications.

    Parameters
    ----------
    specs : sequence of SineSpec or SineTable
        The specifications.
    freq_hz : array_like, optional
        Frequencies at which to tabulate; default: the union of all band edges
        and table points plus 96 log points per octave (the constant-amplitude
        laws are power laws, so log-log interpolation between those points is
        exact except across a crossing between two specs). [Hz]

    Returns
    -------
    SineTable
        max over specs of the peak acceleration. [g]
    """
    specs = list(specs)
    if not specs:
        raise InputError("specs", specs, "needs at least one specification")
    lo = min(s.f_lo_hz for s in specs)
    hi = max(s.f_hi_hz for s in specs)
    if freq_hz is None:
        pts = [np.geomspace(lo, hi, int(math.ceil(96 * math.log2(hi / lo))) + 2)]
        pts += [s.breaks_hz for s in specs]
        f = np.unique(np.concatenate(pts))
    else:
        f = v.as_1d_float("freq_hz", freq_hz, min_size=2)
    a = np.max([s.accel_g(f) for s in specs], axis=0)
    return SineTable(f, a)


def _covers(field_name: str, table_f: np.ndarray, f: np.ndarray) -> None:
    if table_f[0] > f[0] * (1 + 1e-12) or table_f[-1] < f[-1] * (1 - 1e-12):
        raise InputError(field_name, (float(table_f[0]), float(table_f[-1])),
                         f"table must cover the specification band [{f[0]:g}, {f[-1]:g}] Hz")


def notch(spec: SineSpec | SineTable, limit_g, *, fn_hz: float | None = None,
          q: float | None = None, transmissibility=None, freq_hz=None) -> SineTable:
    """Notched input that keeps a response under its limit.

    Parameters
    ----------
    spec : SineSpec or SineTable
        The input specification.
    limit_g : float or (array_like, array_like)
        Response limit: a constant [g peak], or a table (freq [Hz], limit [g]).
    fn_hz, q : float, optional
        SDOF transmissibility model (absolute acceleration), when the item is
        represented by one mode. [Hz], [unitless]
    transmissibility : (array_like, array_like), optional
        Measured transmissibility table (freq [Hz], |response/input| [g/g]),
        log-log interpolated; use instead of `fn_hz`, `q`.
    freq_hz : array_like, optional
        Output frequencies; default: spec breaks, table points, 96 log points
        per octave and 200 points around fn. [Hz]

    Returns
    -------
    SineTable
        a_notched(f) = min(a(f), limit(f) / |T(f)|). [g]

    Notes
    -----
    A quasi-steady response is assumed (slow sweep): response = |T| x input.
    The notch depth at fn for an SDOF is 20 log10(Q a / limit) dB.
    """
    from qualplan.dynamics.sdof import transmissibility as sdof_t

    lo, hi = spec.f_lo_hz, spec.f_hi_hz
    if (transmissibility is None) == (fn_hz is None):
        raise InputError("transmissibility", transmissibility,
                         "give either fn_hz and q (SDOF) or a measured table, not both")
    pts = [np.geomspace(lo, hi, int(math.ceil(96 * math.log2(hi / lo))) + 2), spec.breaks_hz]
    if transmissibility is not None:
        tf = v.as_1d_float("transmissibility[0]", transmissibility[0], min_size=2)
        tv = v.as_1d_float("transmissibility[1]", transmissibility[1], min_size=2)
        v.strictly_increasing("transmissibility[0]", tf)
        v.all_positive("transmissibility[1]", tv)
        pts.append(tf[(tf >= lo) & (tf <= hi)])
    else:
        fn = v.positive_scalar("fn_hz", fn_hz)
        qq = v.check_q(q)
        theta = np.linspace(-0.5 * np.pi, 0.5 * np.pi, 202)[1:-1]
        res = fn * (1 + np.tan(theta) / (2 * qq))
        pts.append(res[(res >= lo) & (res <= hi)])
    f = (np.unique(np.concatenate(pts)) if freq_hz is None
         else v.as_1d_float("freq_hz", freq_hz, min_size=2))
    if transmissibility is not None:
        _covers("transmissibility[0]", tf, f)
        t = _ll._interp(tf, tv, f)
    else:
        t = sdof_t(f, fn, qq)
    if np.ndim(limit_g) == 0:
        lim = np.full_like(f, v.positive_scalar("limit_g", limit_g))
    else:
        lf = v.as_1d_float("limit_g[0]", limit_g[0], min_size=2)
        lv = v.as_1d_float("limit_g[1]", limit_g[1], min_size=2)
        v.all_positive("limit_g[1]", lv)
        v.strictly_increasing("limit_g[0]", lf)
        _covers("limit_g[0]", lf, f)
        lim = _ll._interp(lf, lv, f)
    a = spec.accel_g(f)
    notched = np.minimum(a, lim / t)
    depth = 20 * np.log10(np.max(np.where(notched > 0, a / np.maximum(notched, 1e-300), 1.0)))
    return SineTable(f, notched, notes=(f"maximum notch depth {depth:.2f} dB",))


def tolerance_band(accel_g, tolerance_pct: float) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper tolerance limits of a sine amplitude.

    Parameters
    ----------
    accel_g : array_like
        Specified peak acceleration [g], >= 0.
    tolerance_pct : float
        Amplitude tolerance, 0 < tolerance_pct < 100 [%].

    Returns
    -------
    lower, upper : numpy.ndarray
        ``accel x (1 - p)`` and ``accel x (1 + p)``, p = tolerance_pct / 100 [g].

    References
    ----------
    Sine amplitude tolerance as a percentage of the specified amplitude (common
    practice; +/-10 % from memory of MIL-STD-810H Method 514.8).
    """
    a = v.as_1d_float("accel_g", accel_g)
    if not np.all(a >= 0):
        raise InputError("accel_g", a[~(a >= 0)][0], "must be >= 0 g")
    try:
        p = float(tolerance_pct)
    except (TypeError, ValueError) as exc:
        raise InputError("tolerance_pct", tolerance_pct, "must be a number") from exc
    if not 0 < p < 100:
        raise InputError("tolerance_pct", tolerance_pct, "must be > 0 and < 100 %")
    return a * (1 - p / 100), a * (1 + p / 100)
