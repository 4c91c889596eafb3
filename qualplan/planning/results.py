"""The result of a derived level: one typed value per kind, read by field everywhere.

A level's result is built once, in planning, when the level is derived
(``planning.levels``), and stored as JSON with a ``schema_version``. Every interface
(API, web, CLI, documents) and every planning reader (coverage, evidence, audit) reads
these fields; none re-computes or re-words them. In particular the verdicts
(``verdicts.converged``, ``verdicts.controllable``, ``verdicts.covers_life`` and the
reasons in words) are decided here, so "pass" means the same in every interface, and the
tolerance band is the core's (``psd.tolerance_band``, ``srs.tolerance_band``,
``sine.tolerance_band``), computed once at derivation.

Units are in the field names: Hz, g, g^2/Hz, s, m, m/s, dB, %. JSON field names are those
scripts already read (``freq_hz``, ``asd_g2_hz``, ``accel_g``, ``grms``, ``duration_s``,
``slopes_db_per_oct``, ``steps``, ``life_exposure_s``, ``coverage``).

Adding a field: add it to the model with a default (so rows of the current version still
load), or bump :data:`SCHEMA_VERSION` and add an upgrade function to :data:`UPGRADES` that
brings a row of the previous version to the new one (tests/planning/test_level_results.py
loads rows of every earlier version).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Annotated, Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, TypeAdapter

from qualplan.dynamics import psd as core_psd
from qualplan.dynamics import sine as core_sine
from qualplan.dynamics import srs as core_srs
from qualplan.planning.wording import decibels

#: Version of the stored result JSON. 1: the untyped dict of the first release (no
#: ``schema_version``, no ``kind``, steps as free dicts, no verdicts).
SCHEMA_VERSION = 2

Number = float | None  # a non-finite number is stored as null


class Value(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid")


class Step(Value):
    """One derivation step, in order: what was done, by how many dB, on what basis."""

    #: What was done, e.g. "maximum envelope", "margin", "time compression".
    step: str
    #: Names of the inputs the step worked on (environment and revision).
    inputs: list[str] = []
    #: Change of the level made by the step [dB] (power dB for a PSD, amplitude dB for
    #: an SRS or a sine amplitude); None when the step does not scale the level.
    db: float | None = None
    #: Other quantities the step used or found, names carrying their units.
    values: dict[str, Any] = {}
    #: The policy's or the program's basis for the step.
    basis: str | None = None
    #: The published method applied.
    method: str | None = None

    def items(self) -> list[tuple[str, Any]]:
        """The step's details in reading order (inputs, dB, values, basis, method)."""
        out: list[tuple[str, Any]] = []
        if self.inputs:
            out.append(("inputs", self.inputs))
        if self.db is not None:
            out.append(("db", self.db))
        out.extend(self.values.items())
        if self.basis is not None:
            out.append(("basis", self.basis))
        if self.method is not None:
            out.append(("method", self.method))
        return out


class FdsCoverage(Value):
    """Fatigue coverage for one Basquin exponent b (FDS relative: constants cancel)."""

    test_fds: list[Number]
    life_fds: list[Number]
    fds_ratio_db: list[Number]
    fds_level_db: list[Number]
    required_db: float
    worst_fn_hz: float | None
    worst_db: float | None
    passed: bool


class ErsCoverage(Value):
    """Peak-response coverage: ERS of the test and of the life [g], ratio [dB]."""

    test_ers: list[Number]
    life_ers: list[Number]
    ers_ratio_db: list[Number]
    required_db: float
    worst_fn_hz: float | None
    worst_db: float | None
    passed: bool
    overtest_limit_db: float
    overtest_fn_hz: list[float] = []
    max_overtest_db: float | None = None
    max_overtest_fn_hz: float | None = None


class Coverage(Value):
    """FDS and ERS of the test against the life, on the policy's natural frequencies."""

    fn_hz: list[float] = []
    q: float | None = None
    b: list[float] = []
    tests: list[str] = []
    life: list[str] = []
    by_b: dict[str, FdsCoverage] = {}
    ers: ErsCoverage | None = None
    passed: bool = False
    notes: list[str] = []


class Verdicts(Value):
    """What the level can be trusted for, decided once when it is derived."""

    #: The numeric method met its tolerance (e.g. the FDS inversion on every fn).
    converged: bool
    #: A vibration controller can run it (slopes and dynamic range within the rules);
    #: None where it does not apply (an analysis level).
    controllable: bool | None
    #: Per measure ("FDS b = 4", ..., "ERS"): does the level cover the life?
    covers_life: dict[str, bool] = {}
    #: Each verdict that is not a plain yes, in words.
    reasons: list[str] = []


class Band(Value):
    """Tolerance band around the level, at its table frequencies (the core's band)."""

    freq_hz: list[float]
    lower: list[float]
    upper: list[float]
    #: Unit of ``lower`` and ``upper`` (that of the level's values).
    unit: str
    label: str


class RandomLimit(Value):
    """The limit level (combination of the inputs before margins)."""

    freq_hz: list[float]
    asd_g2_hz: list[float]
    grms: float


class CurveLimit(Value):
    freq_hz: list[float]
    accel_g: list[float]


class Shaker(Value):
    """Shaker demand of a random level (velocity and displacement of the table)."""

    velocity_rms_m_s: float
    displacement_rms_m: float
    displacement_peak_m: float
    displacement_pk_pk_m: float


#: Printed beside every load factor.
LOAD_FACTOR_CAUTION = ("Load factors feed a stress analysis; a responsible engineer must "
                       "approve them and the analysis they enter.")


class LoadFactor(Value):
    """Equivalent-static load factor of an analysis level at one natural frequency.

    ``three_sigma_g`` is 3 x the exact SDOF response rms (``exact_grms``, the integral of
    |H|^2 W over the level); Miles' value is the approximation shown beside it. Rows of
    the first release hold Miles' value only (``exact_grms`` None)."""

    fn_hz: float
    q: float
    asd_at_fn_g2_hz: float
    miles_grms: float
    three_sigma_g: float
    method: str
    exact_grms: float | None = None
    #: (Miles - exact) / exact [%].
    miles_difference_pct: float | None = None
    caution: str = LOAD_FACTOR_CAUTION


class SineBand(Value):
    """A band of a sine level as the lab sets it up (displacement in mm, see envdata)."""

    f_lo_hz: float
    f_hi_hz: float
    quantity: str
    amplitude: float
    measure: str | None = None
    #: Unit of the amplitude as stored (m, m/s or g; absent in rows before units were kept).
    unit: str | None = None


class _Result(Value):
    schema_version: int = SCHEMA_VERSION
    freq_hz: list[float]
    steps: list[Step]
    coverage: Coverage | None = None
    verdicts: Verdicts
    tolerance_band: Band | None = None


class RandomResult(_Result):
    """A random level: ASD breakpoints [Hz, g^2/Hz] straight in log-log."""

    kind: Literal["random"] = "random"
    asd_g2_hz: list[float]
    grms: float
    slopes_db_per_oct: list[Number] = []
    #: Test duration per axis [s]; None for an analysis level.
    duration_s: float | None = None
    tolerance_db: float | None = None
    grms_tolerance_pct: float | None = None
    duration_tolerance_pct: float | None = None
    shaker: Shaker | None = None
    limit: RandomLimit
    #: Exposure of the inputs over the life [s].
    life_exposure_s: float
    load_factor: LoadFactor | None = None

    @property
    def values(self) -> list[float]:
        return self.asd_g2_hz

    @property
    def value_unit(self) -> str:
        return "g^2/Hz"


class SineResult(_Result):
    """A sine level: peak acceleration table [Hz, g] of the sweep, and its bands."""

    kind: Literal["sine"] = "sine"
    accel_g: list[float]
    #: The bands of a single input, scaled (None for an envelope of several inputs).
    bands: list[SineBand] | None = None
    sweep_rate_oct_per_min: float
    direction: str
    sweeps: int
    tolerance_pct: float
    sweep_time_s: float
    peak_accel_g: float
    limit: CurveLimit

    @property
    def values(self) -> list[float]:
        return self.accel_g

    @property
    def value_unit(self) -> str:
        return "g peak"


class ShockResult(_Result):
    """A shock level: maximax SRS breakpoints [Hz, g] at Q, with its tolerances."""

    kind: Literal["shock"] = "shock"
    accel_g: list[float]
    q: float
    slopes_db_per_oct: list[Number] = []
    lower_db: float
    upper_db: float
    outer_lower_db: float | None = None
    outer_upper_db: float | None = None
    min_share_within_band: float | None = None
    min_fraction_above_nominal: float
    shocks_per_direction: int
    directions: str
    shocks_per_axis: int
    limit: CurveLimit

    @property
    def values(self) -> list[float]:
        return self.accel_g

    @property
    def value_unit(self) -> str:
        return "g"


LevelResult = Annotated[RandomResult | SineResult | ShockResult, Field(discriminator="kind")]
_ADAPTER: TypeAdapter = TypeAdapter(LevelResult)


# --- the tolerance band: the core's, once -----------------------------------------------


def random_band(freq_hz, asd_g2_hz, tolerance_db: float) -> Band:
    lo, hi = core_psd.tolerance_band(asd_g2_hz, tolerance_db)
    return Band(freq_hz=list(map(float, freq_hz)), lower=lo.tolist(), upper=hi.tolist(),
                unit="g^2/Hz", label=f"±{tolerance_db:g} dB")


def shock_band(freq_hz, accel_g, lower_db: float, upper_db: float) -> Band:
    lo, _, hi = core_srs.tolerance_band((freq_hz, accel_g), freq_hz, lower_db=lower_db,
                                        upper_db=upper_db)
    return Band(freq_hz=list(map(float, freq_hz)), lower=lo.tolist(), upper=hi.tolist(),
                unit="g", label=f"{lower_db:+g}/{upper_db:+g} dB")


def sine_band(freq_hz, accel_g, tolerance_pct: float) -> Band:
    lo, hi = core_sine.tolerance_band(accel_g, tolerance_pct)
    return Band(freq_hz=list(map(float, freq_hz)), lower=lo.tolist(), upper=hi.tolist(),
                unit="g peak", label=f"±{tolerance_pct:g} %")


# --- verdicts ---------------------------------------------------------------------------


def covers_life(coverage: Coverage | None) -> tuple[dict[str, bool], list[str]]:
    """Per measure, whether the level covers the life, and the shortfalls in words."""
    if coverage is None:
        return {}, []
    if not coverage.fn_hz:
        return {}, [f"coverage not computed: {n}" for n in coverage.notes] or [
            "coverage not computed"]
    out: dict[str, bool] = {}
    reasons: list[str] = []
    for b, item in coverage.by_b.items():
        name = f"FDS b = {b}"
        out[name] = item.passed
        if not item.passed and item.worst_db is not None:
            reasons.append(f"does not cover the life's fatigue: FDS "
                           f"{decibels(item.worst_db, item.required_db)} at "
                           f"{item.worst_fn_hz:.4g} Hz, b = {b} (required "
                           f"{item.required_db:+g} dB)")
    if coverage.ers is not None:
        e = coverage.ers
        out["ERS"] = e.passed
        if e.worst_db is not None and e.worst_db < e.required_db:
            reasons.append(f"does not cover the life's peak response: ERS "
                           f"{decibels(e.worst_db, e.required_db)} at {e.worst_fn_hz:.4g} Hz "
                           f"(required {e.required_db:+g} dB)")
        if e.max_overtest_db is not None and e.max_overtest_db > e.overtest_limit_db:
            reasons.append(f"over-tests: ERS "
                           f"{decibels(e.max_overtest_db, e.overtest_limit_db)} over the life at "
                           f"{e.max_overtest_fn_hz:.4g} Hz (limit {e.overtest_limit_db:+g} dB)")
    return out, reasons


# --- storage ----------------------------------------------------------------------------


def dump(result: RandomResult | SineResult | ShockResult) -> dict[str, Any]:
    """The result as stored JSON (non-finite numbers as null)."""
    return _finite(result.model_dump(mode="json"))


def _finite(value):
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_finite(v) for v in value]
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


def load(kind: str, data: dict[str, Any]) -> RandomResult | SineResult | ShockResult:
    """A stored result of any schema version as the current typed value."""
    data = dict(data)
    version = int(data.get("schema_version", 1))
    if version > SCHEMA_VERSION:
        raise ValueError(f"level result schema_version {version} is newer than this "
                         f"qualplan reads ({SCHEMA_VERSION}): upgrade qualplan")
    while version < SCHEMA_VERSION:
        data = UPGRADES[version](kind, data)
        version = int(data["schema_version"])
    return _ADAPTER.validate_python(data)


STEP_FIELDS = ("step", "inputs", "db", "basis", "method")


def _step_v1(item: dict[str, Any]) -> dict[str, Any]:
    known = {k: item[k] for k in STEP_FIELDS if k in item}
    return {**known, "values": {k: v for k, v in item.items() if k not in STEP_FIELDS}}


def _upgrade_v1(kind: str, data: dict[str, Any]) -> dict[str, Any]:
    """Version 1 (untyped dict) to 2: kind, typed steps, tolerance band, verdicts."""
    out = {**data, "schema_version": 2, "kind": kind}
    out["steps"] = [_step_v1(x) for x in data.get("steps", [])]
    f = data["freq_hz"]
    if kind == "random":
        a = data["asd_g2_hz"]
        out.setdefault("slopes_db_per_oct", core_psd.slopes_db_per_oct(f, a).tolist())
        if data.get("tolerance_db") is not None:
            out["tolerance_band"] = random_band(f, a, data["tolerance_db"]).model_dump()
    elif kind == "shock":
        out["tolerance_band"] = shock_band(f, data["accel_g"], data["lower_db"],
                                           data["upper_db"]).model_dump()
    else:
        out["tolerance_band"] = sine_band(f, data["accel_g"],
                                          data["tolerance_pct"]).model_dump()
    cov = Coverage.model_validate(data["coverage"]) if data.get("coverage") else None
    errors = [e for x in data.get("steps", []) for e in (x.get("max_fds_error") or {}).values()]
    converged = all(e is not None and e <= FDS_RTOL for e in errors)
    reasons = [] if converged else [
        f"FDS inversion did not converge: worst error {max(e or np.inf for e in errors):.3g} "
        f"(tolerance {FDS_RTOL:g})"]
    passed, cov_reasons = covers_life(cov)
    out["verdicts"] = {"converged": converged, "controllable": None, "covers_life": passed,
                       "reasons": reasons + cov_reasons
                       + ["controllability not checked (level derived before it was)"]}
    return out


#: Relative tolerance of the FDS inversion (equivalence.random_test_for_fds's default).
FDS_RTOL = 1e-3

UPGRADES: dict[int, Callable[[str, dict[str, Any]], dict[str, Any]]] = {1: _upgrade_v1}
