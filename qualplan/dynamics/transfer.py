"""Environments carried down the product tree: axis frames, zone transmissibility,
mass attenuation, force limits and notching.

A unit's environment is derived from its parent's by the way it is mounted:

- its orientation in the parent (an axis frame: a signed axis permutation or a
  rotation matrix of direction cosines);
- the transmissibility |T(f)| of the zone it sits in (a gain table from a test,
  an analysis or a handbook zone method), applied as |T|^2 to an ASD and |T| to
  a sine amplitude or an SRS;
- the attenuation of random levels by the unit's own mass;
- in the test, a force limit (NASA-HDBK-7004, semi-empirical method) and notches
  of the input that keep a response or the interface force under its limit.

Units: frequency [Hz], acceleration [g], ASD [g^2/Hz], mass [kg], force [N],
force spectral density [N^2/Hz].

References
----------
.. [1] NASA-HDBK-7004C, Force Limited Vibration Testing, 2012 (semi-empirical
   force limit, eq. S_FF = C^2 M0^2 S_AA below f0 with an (f0/f)^n roll-off
   above; notching of the acceleration input by the force limit).
.. [2] NASA-HDBK-7005, Dynamic Environmental Criteria, 2001 (mass loading of
   the mounting structure by a component; zone methods of transmissibility).
.. [3] GSFC-STD-7000A, General Environmental Verification Standard (GEVS),
   2013, section 2.4.2.5 (component random levels reduced for mass above
   22.7 kg).
.. [4] J. S. Bendat, A. G. Piersol, Random Data, 4th ed., Wiley, 2010 (spectra
   of linear combinations of uncorrelated inputs: sum of squared gains).
.. [5] Harris' Shock and Vibration Handbook, 6th ed., 2010 (base-excited modal
   model, apparent mass, transmissibility).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from qualplan.dynamics import _loglog as _ll
from qualplan.dynamics import _validate as v
from qualplan.dynamics import sine as core_sine
from qualplan.dynamics.errors import InputError
from qualplan.dynamics.units import G0_M_S2

__all__ = [
    "AXES",
    "AxisFrame",
    "axis_frame",
    "map_random",
    "map_peak",
    "GainTable",
    "apply_gain_asd",
    "apply_gain_peak",
    "apply_gain_sine",
    "apply_gain_sine_bands",
    "scale_sine_bands",
    "MassAttenuation",
    "gevs_mass_reduction_db",
    "mass_loading_reduction_db",
    "ForceLimit",
    "semi_empirical_force_limit",
    "Mode",
    "apparent_mass_kg",
    "Notch",
    "NotchedProfile",
    "notch_random",
    "notch_sine",
    "notch_by_force_limit",
    "find_notches",
]

AXES = ("X", "Y", "Z")
_ORTHO_TOL = 1e-6

# ---------------------------------------------------------------------------------------
# Axis frames
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class AxisFrame:
    """Orientation of a child product's axes in its parent's axes.

    Attributes
    ----------
    matrix : numpy.ndarray
        3 x 3 direction cosines, ``matrix[i, j] = cos(child axis i, parent axis j)``
        (rows: child X, Y, Z; columns: parent X, Y, Z). Orthonormal with
        determinant +1 (both frames right-handed). [unitless]
    """

    matrix: np.ndarray

    def __post_init__(self):
        r = np.asarray(self.matrix, dtype=float)
        if r.shape != (3, 3) or not np.isfinite(r).all():
            raise InputError("matrix", f"shape {r.shape}", "must be a finite 3 x 3 matrix")
        err = float(np.max(np.abs(r @ r.T - np.eye(3))))
        if err > _ORTHO_TOL:
            raise InputError("matrix", r.round(6).tolist(),
                             f"must be orthonormal (rows of unit direction cosines at right "
                             f"angles); R R^T differs from I by {err:.3g}")
        det = float(np.linalg.det(r))
        if det < 0:
            raise InputError("matrix", r.round(6).tolist(),
                             "must have determinant +1 (a rotation: both frames right-handed); "
                             "this one mirrors an axis")
        r = r.copy()
        r.flags.writeable = False
        object.__setattr__(self, "matrix", r)

    def weights(self, child_axis: str) -> np.ndarray:
        """Direction cosines of `child_axis` on the parent X, Y, Z. [unitless]"""
        return self.matrix[_axis_index("child_axis", child_axis)]

    def is_permutation(self) -> bool:
        """True for a signed axis permutation (each child axis along one parent axis)."""
        a = np.abs(self.matrix)
        return bool(np.all((np.abs(a - 1.0) < _ORTHO_TOL) | (a < _ORTHO_TOL)))

    def describe(self) -> dict[str, str]:
        """For a signed permutation, e.g. ``{"X": "-Z", "Y": "X", "Z": "-Y"}``."""
        if not self.is_permutation():
            raise InputError("matrix", self.matrix.round(6).tolist(),
                             "is not a signed axis permutation")
        out = {}
        for i, ax in enumerate(AXES):
            j = int(np.argmax(np.abs(self.matrix[i])))
            out[ax] = ("-" if self.matrix[i, j] < 0 else "") + AXES[j]
        return out


def _axis_index(field: str, axis: str) -> int:
    if axis not in AXES:
        raise InputError(field, axis, "must be 'X', 'Y' or 'Z'")
    return AXES.index(axis)


def axis_frame(spec) -> AxisFrame:
    """Axis frame from a signed permutation or a matrix of direction cosines.

    Parameters
    ----------
    spec : mapping or array_like
        Either a signed permutation ``{"X": "-Z", "Y": "X", "Z": "-Y"}`` (child
        axis -> parent axis it lies along, with a sign), or a 3 x 3 matrix of
        direction cosines (rows child X, Y, Z; columns parent X, Y, Z).
        [unitless]

    Returns
    -------
    AxisFrame
    """
    if isinstance(spec, Mapping):
        if set(spec) != set(AXES):
            raise InputError("axes", dict(spec), "must give each of the child axes X, Y, Z")
        r = np.zeros((3, 3))
        for i, ax in enumerate(AXES):
            target = str(spec[ax]).strip().upper()
            sign = -1.0 if target.startswith("-") else 1.0
            name = target.lstrip("+-")
            if name not in AXES:
                raise InputError(f"axes.{ax}", spec[ax],
                                 "must be a parent axis with an optional sign, e.g. '-Z'")
            r[i, AXES.index(name)] = sign
        if np.linalg.matrix_rank(r) < 3:
            raise InputError("axes", dict(spec), "must use each parent axis once")
        return AxisFrame(r)
    return AxisFrame(np.asarray(spec, dtype=float))


def _profile(field: str, p):
    try:
        f, a = p
    except (TypeError, ValueError) as exc:
        raise InputError(field, type(p).__name__, "must be a (freq_hz, values) pair") from exc
    return _ll.check_profile(f, a, f"{field}.freq_hz", f"{field}.values")


def _dense_grid(freqs: Sequence[np.ndarray], per_octave: int) -> np.ndarray:
    lo = min(float(f[0]) for f in freqs)
    hi = max(float(f[-1]) for f in freqs)
    n = int(math.ceil(per_octave * math.log2(hi / lo))) + 1
    g = np.unique(np.concatenate([np.geomspace(lo, hi, n + 1), *freqs]))
    return g


def map_random(frame: AxisFrame, parent: Mapping[str, tuple], *, per_octave: int = 24
               ) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Random input on each child axis: direction-cosine-weighted sum of parent ASDs.

    Parameters
    ----------
    frame : AxisFrame
        The child's orientation in the parent.
    parent : mapping
        Parent axis -> (freq_hz [Hz], asd_g2_hz [g^2/Hz]) breakpoints; a missing
        axis has no random input.
    per_octave : int, optional
        Points per octave added between breakpoints where more than one parent
        axis contributes. [1/oct]

    Returns
    -------
    dict
        Child axis -> (freq_hz [Hz], asd_g2_hz [g^2/Hz]) for each child axis that
        receives input.

    Notes
    -----
    The parent axes' random inputs are assumed UNCORRELATED, so the cross-spectra
    vanish and the ASD along a unit vector with direction cosines c_j is
    ``S_i(f) = sum_j c_ij^2 S_j(f)`` (spectrum of a linear combination of
    uncorrelated signals, [4]). Correlated axes would add 2 c_ij c_ik Re S_jk,
    which can raise or lower the result: the assumption must be stated with any
    level derived this way. A signed permutation maps each axis exactly.
    A sum of log-log straight lines is convex in log-log axes, so the breakpoints
    returned (the union of the inputs' plus `per_octave` points) interpolate at
    or above the exact sum.
    """
    per_octave = int(per_octave)
    if per_octave < 1:
        raise InputError("per_octave", per_octave, "must be >= 1")
    profiles = {}
    for ax, p in parent.items():
        _axis_index("parent axis", ax)
        profiles[ax] = _profile(f"parent.{ax}", p)
    if not profiles:
        raise InputError("parent", dict(parent), "needs at least one parent axis")
    out = {}
    for i, cax in enumerate(AXES):
        terms = [(frame.matrix[i, AXES.index(pax)] ** 2, f, a)
                 for pax, (f, a) in profiles.items()
                 if frame.matrix[i, AXES.index(pax)] ** 2 > 1e-12]
        if not terms:
            continue
        if len(terms) == 1:
            w, f, a = terms[0]
            out[cax] = (f.copy(), w * a)
            continue
        g = _dense_grid([f for _, f, _ in terms], per_octave)
        s = np.zeros_like(g)
        for w, f, a in terms:
            s += w * _ll.interp(f, a, g)
        if (s <= 0).any():
            k = int(np.argmax(s <= 0))
            raise InputError(f"child.{cax}", f"{g[k]:.6g} Hz",
                             "no parent axis gives input at this frequency (bands leave a gap)")
        out[cax] = (g, s)
    return out


def map_peak(frame: AxisFrame, parent: Mapping[str, tuple]
             ) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Sine or SRS on each child axis: envelope of the direction-cosine-weighted components.

    Parameters
    ----------
    frame : AxisFrame
        The child's orientation in the parent.
    parent : mapping
        Parent axis -> (freq_hz [Hz], peak values [g]) breakpoints (a sine
        amplitude table or an SRS).

    Returns
    -------
    dict
        Child axis -> (freq_hz [Hz], values [g]):
        ``A_i(f) = max_j |c_ij| A_j(f)``.

    Notes
    -----
    Sine and shock environments of different parent axes are separate events
    (one axis at a time, as they are specified and tested), so each child axis
    must cover the worst weighted component: the envelope, exact in log-log
    (``_loglog.envelope``). This is conservative for separate events; it is NOT
    an upper bound if the parent axes were excited together in phase (then
    ``sum_j |c_ij| A_j`` would be). A signed permutation maps each axis exactly.
    """
    profiles = {}
    for ax, p in parent.items():
        _axis_index("parent axis", ax)
        profiles[ax] = _profile(f"parent.{ax}", p)
    if not profiles:
        raise InputError("parent", dict(parent), "needs at least one parent axis")
    out = {}
    for i, cax in enumerate(AXES):
        terms = [(abs(frame.matrix[i, AXES.index(pax)]), f, a)
                 for pax, (f, a) in profiles.items()
                 if abs(frame.matrix[i, AXES.index(pax)]) > 1e-9]
        if not terms:
            continue
        out[cax] = _ll.envelope([(f, w * a) for w, f, a in terms])
    return out


# ---------------------------------------------------------------------------------------
# Zone transmissibility
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class GainTable:
    """A transmissibility |T(f)| from the parent's input to the child's mounting.

    Attributes
    ----------
    freq_hz : numpy.ndarray
        Strictly increasing frequencies. [Hz]
    gain : numpy.ndarray
        |T| at those frequencies, > 0, log-log interpolated. [g/g]
    """

    freq_hz: np.ndarray
    gain: np.ndarray

    def __post_init__(self):
        f, g = _ll.check_profile(self.freq_hz, self.gain, "freq_hz", "gain")
        object.__setattr__(self, "freq_hz", f)
        object.__setattr__(self, "gain", g)

    def at(self, freq_hz) -> np.ndarray:
        """|T| at `freq_hz`, log-log interpolated; 0 outside the table. [g/g]"""
        return _ll.interp(self.freq_hz, self.gain, freq_hz)

    def covers(self, f_lo_hz: float, f_hi_hz: float, field: str = "gain") -> None:
        """Raise InputError unless the table covers [f_lo_hz, f_hi_hz] [Hz]."""
        if self.freq_hz[0] > f_lo_hz * (1 + 1e-12) or self.freq_hz[-1] < f_hi_hz * (1 - 1e-12):
            raise InputError(field, (float(self.freq_hz[0]), float(self.freq_hz[-1])),
                             f"transmissibility must cover the environment band "
                             f"[{f_lo_hz:g}, {f_hi_hz:g}] Hz (no extrapolation)")


def _times_gain(f: np.ndarray, values: np.ndarray, table: GainTable, power: int):
    table.covers(float(f[0]), float(f[-1]))
    inside = table.freq_hz[(table.freq_hz > f[0]) & (table.freq_hz < f[-1])]
    g = np.unique(np.concatenate([f, inside]))
    return g, _ll.interp(f, values, g) * table.at(g) ** power


def apply_gain_asd(freq_hz, asd_g2_hz, table: GainTable):
    """Child ASD through a zone transmissibility: S_out(f) = |T(f)|^2 S_in(f).

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Input ASD breakpoints. [Hz], [g^2/Hz]
    table : GainTable
        |T(f)| covering the input band. [g/g]

    Returns
    -------
    freq_hz, asd_g2_hz : numpy.ndarray
        Breakpoints on the union of both tables' frequencies; exact, since the
        product of two log-log straight lines is one. [Hz], [g^2/Hz]

    References
    ----------
    Linear system response spectrum S_y = |H|^2 S_x, Bendat & Piersol [4];
    transmissibility of zones, NASA-HDBK-7005 [2].
    """
    f, a = _ll.check_profile(freq_hz, asd_g2_hz, "freq_hz", "asd_g2_hz")
    return _times_gain(f, a, table, 2)


def apply_gain_peak(freq_hz, accel_g, table: GainTable):
    """Child sine amplitude or SRS through a zone transmissibility: A_out = |T| A_in.

    Parameters
    ----------
    freq_hz, accel_g : array_like
        Input breakpoints (sine peak table or SRS). [Hz], [g]
    table : GainTable
        |T(f)| covering the input band. [g/g]

    Returns
    -------
    freq_hz, accel_g : numpy.ndarray
        [Hz], [g]

    Notes
    -----
    For a slow sine sweep the response is quasi-steady and |T| x input is exact
    for a linear mounting. For an SRS, multiplying by |T| at the oscillator's
    natural frequency is common practice, not an identity: the SRS of the
    filtered shock differs from |T| x SRS where |T| varies within the
    oscillator's bandwidth (fn / Q); state it with any level derived this way.
    """
    f, a = _ll.check_profile(freq_hz, accel_g, "freq_hz", "accel_g")
    return _times_gain(f, a, table, 1)


def apply_gain_sine(spec, table: GainTable) -> core_sine.SineTable:
    """Sine specification (SineSpec or SineTable) times |T|, as a SineTable [g peak]."""
    lo, hi = spec.f_lo_hz, spec.f_hi_hz
    table.covers(lo, hi)
    tab = core_sine.envelope([spec]) if isinstance(spec, core_sine.SineSpec) else spec
    inside = table.freq_hz[(table.freq_hz > lo) & (table.freq_hz < hi)]
    g = np.unique(np.concatenate([tab.freq_hz, inside]))
    return core_sine.SineTable(g, tab.accel_g(g) * table.at(g),
                               notes=("times zone transmissibility |T|",))


def scale_sine_bands(spec: core_sine.SineSpec, factor: float) -> core_sine.SineSpec:
    """Every band's amplitude times `factor` (> 0) [unitless]: the law a(f) scales alike."""
    k = v.positive_scalar("factor", factor)
    return core_sine.SineSpec(tuple(core_sine.SineBand(b.f_lo_hz, b.f_hi_hz, b.quantity,
                                                       b.amplitude * k) for b in spec.bands))


def apply_gain_sine_bands(spec: core_sine.SineSpec, table: GainTable) -> core_sine.SineSpec:
    """Sine specification through |T| kept in band form, bounded from above.

    Parameters
    ----------
    spec : SineSpec
        Input bands (constant displacement, velocity or acceleration). [m], [m/s], [g]
    table : GainTable
        |T(f)| covering the specification band. [g/g]

    Returns
    -------
    SineSpec
        Each band split at the table's frequencies; each piece keeps its law and
        is scaled by the largest |T| over the piece. [g peak at every frequency]

    Notes
    -----
    |T| is a log-log straight line between table points, so it is monotonic on
    each piece and its maximum is at an end: the result lies at or above
    |T(f)| a(f) everywhere (conservative), equal to it where |T| is constant
    over a piece. Use :func:`apply_gain_sine` for the exact table.
    """
    table.covers(spec.f_lo_hz, spec.f_hi_hz)
    bands = []
    for b in spec.bands:
        inner = table.freq_hz[(table.freq_hz > b.f_lo_hz) & (table.freq_hz < b.f_hi_hz)]
        edges = np.concatenate([[b.f_lo_hz], inner, [b.f_hi_hz]])
        for lo, hi in zip(edges[:-1], edges[1:], strict=True):
            k = float(np.max(table.at(np.array([lo, hi]))))
            bands.append(core_sine.SineBand(float(lo), float(hi), b.quantity, b.amplitude * k))
    return core_sine.SineSpec(tuple(bands))


# ---------------------------------------------------------------------------------------
# Mass attenuation
# ---------------------------------------------------------------------------------------

#: GEVS component mass above which random levels may be reduced [kg] (50 lb).
#: From memory of GSFC-STD-7000A 2.4.2.5, to be checked against the standard.
GEVS_THRESHOLD_KG = 22.7
#: Largest reduction GEVS allows by mass [dB]. From memory, to be checked.
GEVS_MAX_REDUCTION_DB = 6.0
#: Mass above which GEVS asks for levels set case by case [kg] (400 lb).
#: From memory, to be checked.
GEVS_UPPER_KG = 182.0


@dataclass(frozen=True)
class MassAttenuation:
    """A reduction of random levels for a unit's mass, with its basis and limits.

    Attributes
    ----------
    reduction_db : float
        Reduction of the ASD, >= 0 (the ASD is multiplied by 10^(-dB/10)). [dB]
    method : str
        "gevs" or "mass_loading".
    notes : tuple of str
        Basis, limits of use, and what must be checked.
    """

    reduction_db: float
    method: str
    notes: tuple[str, ...]

    def apply(self, freq_hz, asd_g2_hz):
        """The ASD reduced uniformly by `reduction_db` [Hz], [g^2/Hz]."""
        f, a = _ll.check_profile(freq_hz, asd_g2_hz, "freq_hz", "asd_g2_hz")
        return f, a * 10.0 ** (-self.reduction_db / 10.0)


def gevs_mass_reduction_db(mass_kg: float) -> MassAttenuation:
    """GEVS reduction of component random levels for a mass above 22.7 kg.

    Parameters
    ----------
    mass_kg : float
        The unit's mass. [kg]

    Returns
    -------
    MassAttenuation
        reduction = 10 log10(M / 22.7 kg), 0 at or below 22.7 kg, at most 6 dB;
        the whole ASD moves down with its slopes kept. [dB]

    Raises
    ------
    InputError
        Above 182 kg, where GEVS sets levels case by case (limit of use).

    Notes
    -----
    FROM MEMORY of GSFC-STD-7000A section 2.4.2.5 (the ASD of the generalised
    component levels scaled by (22.7 / M) for M > 22.7 kg, slopes kept,
    reduction limited to 6 dB; heavier than 182 kg: case by case). The
    threshold, the limit of 6 dB and the 182 kg bound must be checked against
    the standard before a level is issued. It applies to the generalised
    component levels of GEVS, not to a measured or zone-derived environment.
    """
    m = v.positive_scalar("mass_kg", mass_kg)
    if m > GEVS_UPPER_KG:
        raise InputError("mass_kg", mass_kg,
                         f"above {GEVS_UPPER_KG:g} kg GEVS sets random levels case by case; "
                         "no mass reduction by formula")
    db = 0.0 if m <= GEVS_THRESHOLD_KG else min(10.0 * math.log10(m / GEVS_THRESHOLD_KG),
                                                GEVS_MAX_REDUCTION_DB)
    return MassAttenuation(db, "gevs", (
        f"GSFC-STD-7000A 2.4.2.5 mass reduction 10 log10(M/{GEVS_THRESHOLD_KG:g} kg), "
        f"at most {GEVS_MAX_REDUCTION_DB:g} dB, for {GEVS_THRESHOLD_KG:g} < M <= "
        f"{GEVS_UPPER_KG:g} kg (values from memory, to be checked)",
        "applies to the generalised component levels, slopes kept",
    ))


def mass_loading_reduction_db(unit_mass_kg: float, mounting_mass_kg: float, *,
                              max_reduction_db: float = 6.0) -> MassAttenuation:
    """Mass-loading attenuation of the mounting structure's random input by a unit.

    Parameters
    ----------
    unit_mass_kg : float
        The unit's mass M_c. [kg]
    mounting_mass_kg : float
        Effective (apparent) mass M_s of the mounting structure in the band of
        interest, from a test or an analysis of the bare structure. [kg]
    max_reduction_db : float, optional
        Cap on the reduction (default 6 dB, common practice). [dB]

    Returns
    -------
    MassAttenuation
        reduction = 20 log10(1 + M_c / M_s), capped. [dB]

    Notes
    -----
    A mounting that behaves as a mass M_s driven by the same force is slowed by
    the added unit in the ratio M_s / (M_s + M_c) in acceleration, so the ASD
    falls by (M_s / (M_s + M_c))^2 (Newton's second law; the mass-loading
    argument of NASA-HDBK-7005 [2], from memory, to be checked). Limits of use:
    the unit must be rigid in the band (below its own first mode on the
    mounting: above it, use force limiting), the structure must act as a mass
    near its interface, and the unloaded environment must be measured or
    predicted without the unit.
    """
    mc = v.positive_scalar("unit_mass_kg", unit_mass_kg)
    ms = v.positive_scalar("mounting_mass_kg", mounting_mass_kg)
    cap = v.positive_scalar("max_reduction_db", max_reduction_db)
    db = min(20.0 * math.log10(1.0 + mc / ms), cap)
    return MassAttenuation(db, "mass_loading", (
        f"mass loading 20 log10(1 + M_c/M_s), M_c = {mc:g} kg, M_s = {ms:g} kg, "
        f"capped at {cap:g} dB (NASA-HDBK-7005 approach, from memory, to be checked)",
        "valid below the unit's first mode on its mounting, structure acting as a mass",
    ))


# ---------------------------------------------------------------------------------------
# Force limits
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class ForceLimit:
    """A force spectral density limit at the test item's interface.

    Attributes
    ----------
    freq_hz : numpy.ndarray
        Breakpoints (including f0). [Hz]
    fsd_n2_hz : numpy.ndarray
        Force spectral density limit S_FF. [N^2/Hz]
    c2, mass_kg, f0_hz, rolloff : float
        The semi-empirical constant C^2 [unitless], the total mass M0 [kg], the
        break frequency [Hz] and the roll-off exponent n above it [unitless].
    """

    freq_hz: np.ndarray
    fsd_n2_hz: np.ndarray
    c2: float
    mass_kg: float
    f0_hz: float
    rolloff: float

    @property
    def force_rms_n(self) -> float:
        """Overall rms force sqrt(integral S_FF df). [N]"""
        return float(math.sqrt(np.sum(_ll.segment_integrals(self.freq_hz, self.fsd_n2_hz))))

    @property
    def rolloff_db_per_oct(self) -> float:
        """Slope above f0, -10 n log10(2). [dB/oct]"""
        return -10.0 * self.rolloff * math.log10(2.0)

    def at(self, freq_hz) -> np.ndarray:
        """S_FF at `freq_hz`, log-log interpolated, 0 outside. [N^2/Hz]"""
        return _ll.interp(self.freq_hz, self.fsd_n2_hz, freq_hz)


def semi_empirical_force_limit(freq_hz, asd_g2_hz, *, mass_kg: float, c2: float,
                               f0_hz: float, rolloff: float = 2.0) -> ForceLimit:
    """NASA-HDBK-7004 semi-empirical force limit from the acceleration specification.

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Acceleration specification S_AA (the input ASD) breakpoints. [Hz], [g^2/Hz]
    mass_kg : float
        Total mass M0 of the test item. [kg]
    c2 : float
        Semi-empirical constant C^2 (the handbook's typical range is about
        1.4 to 5, from memory; 2 is common for complex mountings). [unitless]
    f0_hz : float
        Break frequency: the item's fundamental frequency on its mounting
        (where its effective mass peaks). [Hz]
    rolloff : float, optional
        Exponent n of the roll-off (f0/f)^n above f0 (default 2, as in the
        handbook's equation). [unitless]

    Returns
    -------
    ForceLimit
        S_FF(f) = C^2 M0^2 S_AA(f) g0^2 for f < f0, and
        C^2 M0^2 S_AA(f) g0^2 (f0/f)^n for f >= f0. [N^2/Hz]

    References
    ----------
    NASA-HDBK-7004C [1], semi-empirical method (equations from memory of the
    handbook's form, S_FF = C^2 M0^2 S_AA below f0, (f0/f)^2 roll-off above).
    """
    f, a = _ll.check_profile(freq_hz, asd_g2_hz, "freq_hz", "asd_g2_hz")
    m0 = v.positive_scalar("mass_kg", mass_kg)
    c = v.positive_scalar("c2", c2)
    f0 = v.positive_scalar("f0_hz", f0_hz)
    n = v.positive_scalar("rolloff", rolloff)
    g = np.unique(np.concatenate([f, [f0]])) if f[0] < f0 < f[-1] else f
    s = c * m0 * m0 * _ll.interp(f, a, g) * G0_M_S2 ** 2
    s = np.where(g >= f0, s * (f0 / g) ** n, s)
    return ForceLimit(g, s, c, m0, f0, n)


@dataclass(frozen=True)
class Mode:
    """One mode of a base-driven item: natural frequency, effective mass and Q.

    Attributes
    ----------
    fn_hz : float
        Natural frequency on the fixed base. [Hz]
    mass_kg : float
        Modal effective mass in the driven direction. [kg]
    q : float
        Amplification Q = 1 / (2 zeta). [unitless]
    """

    fn_hz: float
    mass_kg: float
    q: float

    def __post_init__(self):
        v.positive_scalar("fn_hz", self.fn_hz)
        v.positive_scalar("mass_kg", self.mass_kg)
        v.check_q(self.q)


def apparent_mass_kg(freq_hz, modes: Sequence[Mode], residual_mass_kg: float = 0.0
                     ) -> np.ndarray:
    """Drive-point apparent mass |F / a| of a base-driven item from its modes.

    Parameters
    ----------
    freq_hz : array_like
        Frequencies. [Hz]
    modes : sequence of Mode
        Modes with their effective masses. [Hz], [kg], [unitless]
    residual_mass_kg : float, optional
        Mass not in the listed modes (total mass minus the sum of effective
        masses), moving with the base. [kg]

    Returns
    -------
    numpy.ndarray
        |M(f)| = |M_res + sum_k m_k (1 + j r_k/Q_k) / (1 - r_k^2 + j r_k/Q_k)|,
        r_k = f / fn_k. [kg]

    References
    ----------
    Modal model of a base-driven structure: the interface force is the sum of
    each effective mass times its absolute acceleration, Harris [5];
    NASA-HDBK-7004C [1] (apparent mass, effective mass).
    """
    f = v.as_1d_float("freq_hz", freq_hz)
    if not modes:
        raise InputError("modes", modes, "needs at least one mode")
    res = float(residual_mass_kg)
    if not math.isfinite(res) or res < 0:
        raise InputError("residual_mass_kg", residual_mass_kg, "must be a finite number >= 0")
    total = np.full(f.shape, res, dtype=complex)
    for k, mode in enumerate(modes):
        if not isinstance(mode, Mode):
            raise InputError(f"modes[{k}]", mode, "must be a Mode(fn_hz, mass_kg, q)")
        r = f / mode.fn_hz
        jr = 1j * r / mode.q
        total += mode.mass_kg * (1.0 + jr) / (1.0 - r * r + jr)
    return np.abs(total)


# ---------------------------------------------------------------------------------------
# Notching (one implementation: qualplan.dynamics.sine.notch)
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Notch:
    """One notch of an input profile.

    Attributes
    ----------
    f_lo_hz, f_hi_hz : float
        Where the notched input falls below the original. [Hz]
    f_deepest_hz : float
        Frequency of the deepest point. [Hz]
    depth_db : float
        Greatest depth, 10 log10 of the ASD ratio or 20 log10 of the amplitude
        ratio (the same number for one notch). [dB]
    width_oct : float
        log2(f_hi / f_lo). [oct]
    exceeds_policy : bool
        Deeper than the policy's maximum notch depth (needs an approver's
        acceptance).
    """

    f_lo_hz: float
    f_hi_hz: float
    f_deepest_hz: float
    depth_db: float
    width_oct: float
    exceeds_policy: bool


@dataclass(frozen=True, eq=False)
class NotchedProfile:
    """A notched input profile and its notches.

    Attributes
    ----------
    freq_hz : numpy.ndarray
        Frequencies. [Hz]
    values : numpy.ndarray
        Notched input: ASD [g^2/Hz] for random, peak [g] for sine.
    original : numpy.ndarray
        The input before notching, same unit as `values`.
    notches : tuple of Notch
    max_notch_db : float or None
        The policy's maximum notch depth used to flag notches. [dB]
    """

    freq_hz: np.ndarray
    values: np.ndarray
    original: np.ndarray
    notches: tuple[Notch, ...]
    max_notch_db: float | None

    @property
    def needs_acceptance(self) -> bool:
        """True when a notch is deeper than the policy allows."""
        return any(n.exceeds_policy for n in self.notches)

    @property
    def deepest_db(self) -> float:
        """Depth of the deepest notch, 0 when there is none. [dB]"""
        return max((n.depth_db for n in self.notches), default=0.0)


def find_notches(freq_hz, original, notched, *, power: bool,
                 max_notch_db: float | None = None, floor_db: float = 0.01
                 ) -> tuple[Notch, ...]:
    """Contiguous regions where a notched profile lies below the original.

    Parameters
    ----------
    freq_hz : array_like
        Frequencies. [Hz]
    original, notched : array_like
        Input before and after notching (ASD [g^2/Hz] if `power`, else an
        amplitude [g]).
    power : bool
        10 log10 (power) or 20 log10 (amplitude) dB.
    max_notch_db : float, optional
        Policy maximum depth; deeper notches are flagged. [dB]
    floor_db : float, optional
        Depth below which a point is not counted as notched. [dB]

    Returns
    -------
    tuple of Notch
    """
    f = v.as_1d_float("freq_hz", freq_hz)
    a = v.as_1d_float("original", original)
    b = v.as_1d_float("notched", notched)
    if not (a.size == b.size == f.size):
        raise InputError("notched", b.size, f"must have one value per frequency ({f.size})")
    scale = 10.0 if power else 20.0
    with np.errstate(divide="ignore", invalid="ignore"):
        depth = np.where(a > 0, scale * np.log10(a / np.maximum(b, 1e-300)), 0.0)
    mask = depth > floor_db
    out = []
    i = 0
    while i < f.size:
        if not mask[i]:
            i += 1
            continue
        j = i
        while j + 1 < f.size and mask[j + 1]:
            j += 1
        lo, hi = max(i - 1, 0), min(j + 1, f.size - 1)  # edges: last unnotched points
        k = i + int(np.argmax(depth[i:j + 1]))
        d = float(depth[k])
        out.append(Notch(float(f[lo]), float(f[hi]), float(f[k]), d,
                         float(math.log2(f[hi] / f[lo])),
                         bool(max_notch_db is not None and d > max_notch_db + 1e-9)))
        i = j + 1
    return tuple(out)


def _max_db(max_notch_db):
    return None if max_notch_db is None else v.positive_scalar("max_notch_db", max_notch_db)


def notch_sine(spec, limit_g, transmissibility: GainTable, *, max_notch_db: float | None = None,
               freq_hz=None) -> NotchedProfile:
    """Notched sine input that keeps a response under its limit.

    Parameters
    ----------
    spec : SineSpec or SineTable
        Input sine specification. [g peak]
    limit_g : float or (array_like, array_like)
        Response limit at the control or monitor location: a constant [g peak]
        or a table (freq [Hz], limit [g peak]); a load limit divided by the
        load per g of input gives the same form.
    transmissibility : GainTable
        |response / input| from a low-level survey or an analysis. [g/g]
    max_notch_db : float, optional
        The policy's maximum notch depth. [dB]
    freq_hz : array_like, optional
        Output frequencies. [Hz]

    Returns
    -------
    NotchedProfile
        a_notched(f) = min(a(f), limit(f) / |T(f)|) [g], computed by
        :func:`qualplan.dynamics.sine.notch`, with each notch's depth and width.
    """
    md = _max_db(max_notch_db)
    tab = core_sine.notch(spec, limit_g, transmissibility=(transmissibility.freq_hz,
                                                          transmissibility.gain),
                          freq_hz=freq_hz)
    orig = spec.accel_g(tab.freq_hz)
    return NotchedProfile(tab.freq_hz, tab.accel_g_points, orig,
                          find_notches(tab.freq_hz, orig, tab.accel_g_points, power=False,
                                       max_notch_db=md), md)


def _grid_for(f: np.ndarray, extra: Sequence[np.ndarray], per_octave: int = 96) -> np.ndarray:
    lo, hi = float(f[0]), float(f[-1])
    n = int(math.ceil(per_octave * math.log2(hi / lo))) + 2
    pts = [np.geomspace(lo, hi, n), f] + [e[(e >= lo) & (e <= hi)] for e in extra]
    return np.unique(np.concatenate(pts))


def notch_random(freq_hz, asd_g2_hz, limit_g2_hz, transmissibility: GainTable, *,
                 max_notch_db: float | None = None) -> NotchedProfile:
    """Notched random input that keeps a response ASD under its limit.

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Input ASD breakpoints. [Hz], [g^2/Hz]
    limit_g2_hz : float or (array_like, array_like)
        Response ASD limit at the control or monitor location: a constant
        [g^2/Hz] or a table (freq [Hz], limit [g^2/Hz]).
    transmissibility : GainTable
        |response / input| from a low-level survey or an analysis. [g/g]
    max_notch_db : float, optional
        The policy's maximum notch depth. [dB]

    Returns
    -------
    NotchedProfile
        S_notched(f) = min(S(f), L(f) / |T(f)|^2) [g^2/Hz].

    Notes
    -----
    One implementation for both kinds: the ASD's square root (an amplitude
    spectral density [g/sqrt(Hz)]) is notched by
    :func:`qualplan.dynamics.sine.notch` against sqrt(L) with the same |T|, and
    squared back; min(sqrt S, sqrt L / |T|)^2 = min(S, L / |T|^2).
    """
    f, a = _ll.check_profile(freq_hz, asd_g2_hz, "freq_hz", "asd_g2_hz")
    md = _max_db(max_notch_db)
    if np.ndim(limit_g2_hz) == 0:
        lim = math.sqrt(v.positive_scalar("limit_g2_hz", limit_g2_hz))
        extra = []
    else:
        lf, lv = _ll.check_profile(limit_g2_hz[0], limit_g2_hz[1], "limit_g2_hz[0]",
                                   "limit_g2_hz[1]")
        lim = (lf, np.sqrt(lv))
        extra = [lf]
    grid = _grid_for(f, [transmissibility.freq_hz, *extra])
    amplitude = core_sine.SineTable(f, np.sqrt(a))
    tab = core_sine.notch(amplitude, lim, transmissibility=(transmissibility.freq_hz,
                                                            transmissibility.gain),
                          freq_hz=grid)
    orig = _ll.interp(f, a, tab.freq_hz)
    out = tab.accel_g_points ** 2
    return NotchedProfile(tab.freq_hz, out, orig,
                          find_notches(tab.freq_hz, orig, out, power=True, max_notch_db=md), md)


def notch_by_force_limit(freq_hz, asd_g2_hz, limit: ForceLimit, modes: Sequence[Mode], *,
                         residual_mass_kg: float = 0.0, max_notch_db: float | None = None,
                         apparent_mass=None) -> NotchedProfile:
    """Predicted notches of the input ASD where the interface force reaches its limit.

    Parameters
    ----------
    freq_hz, asd_g2_hz : array_like
        Acceleration specification S_AA breakpoints. [Hz], [g^2/Hz]
    limit : ForceLimit
        The force spectral density limit. [N^2/Hz]
    modes : sequence of Mode
        The item's modes (effective masses from the modal summary); ignored
        when `apparent_mass` is given. [Hz], [kg], [unitless]
    residual_mass_kg : float, optional
        Mass outside the listed modes. [kg]
    max_notch_db : float, optional
        The policy's maximum notch depth. [dB]
    apparent_mass : (array_like, array_like), optional
        A given apparent-mass table (freq [Hz], |M| [kg]) instead of modes.

    Returns
    -------
    NotchedProfile
        S_notched(f) = min(S_AA(f), S_FF(f) / (|M(f)|^2 g0^2)) [g^2/Hz].

    Notes
    -----
    The interface force of a linear item is F = M(f) a, so its spectrum is
    |M|^2 S_AA; holding it at the limit notches the input by
    10 log10(|M|^2 g0^2 S_AA / S_FF) dB where that is positive (NASA-HDBK-7004C
    [1], force limiting). Computed with :func:`qualplan.dynamics.sine.notch`
    on amplitude spectral densities (|M| as the transmissibility).
    """
    f, a = _ll.check_profile(freq_hz, asd_g2_hz, "freq_hz", "asd_g2_hz")
    md = _max_db(max_notch_db)
    if apparent_mass is not None:
        mf, mv = _ll.check_profile(apparent_mass[0], apparent_mass[1], "apparent_mass[0]",
                                   "apparent_mass[1]")
        grid = _grid_for(f, [mf, limit.freq_hz])
    else:
        if not modes:
            raise InputError("modes", modes, "needs at least one mode or an apparent_mass table")
        extra = []
        for mode in modes:
            theta = np.linspace(-0.5 * np.pi, 0.5 * np.pi, 202)[1:-1]
            extra.append(mode.fn_hz * (1 + np.tan(theta) / (2 * mode.q)))
        extra = [e[e > 0] for e in extra]
        grid = _grid_for(f, [*extra, limit.freq_hz])
        mf = grid
        mv = apparent_mass_kg(grid, modes, residual_mass_kg)
    lo, hi = float(f[0]), float(f[-1])
    if limit.freq_hz[0] > lo * (1 + 1e-12) or limit.freq_hz[-1] < hi * (1 - 1e-12):
        raise InputError("limit", (float(limit.freq_hz[0]), float(limit.freq_hz[-1])),
                         f"force limit must cover the specification band [{lo:g}, {hi:g}] Hz")
    # amplitude densities: sqrt(S_AA) [g/sqrt(Hz)]; limit sqrt(S_FF)/g0 [kg g/sqrt(Hz)]
    amplitude = core_sine.SineTable(f, np.sqrt(a))
    lim = (limit.freq_hz, np.sqrt(limit.fsd_n2_hz) / G0_M_S2)
    tab = core_sine.notch(amplitude, lim, transmissibility=(mf, mv), freq_hz=grid)
    orig = _ll.interp(f, a, tab.freq_hz)
    out = tab.accel_g_points ** 2
    return NotchedProfile(tab.freq_hz, out, orig,
                          find_notches(tab.freq_hz, orig, out, power=True, max_notch_db=md), md)
