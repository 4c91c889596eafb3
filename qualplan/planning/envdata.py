"""Environment data: validation of each kind's content, summaries, and core objects.

The content of a revision (``spec`` JSON plus an optional array) is checked here
with the numeric core's own validators, so the same fault gives the same message
from the API, the CLI and the web pages. Core errors become ValidationFailed with
the field prefixed by ``data.``.
"""

from __future__ import annotations

import math
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import numpy as np

from qualplan.dynamics import psd as core_psd
from qualplan.dynamics import sine as core_sine
from qualplan.dynamics import srs as core_srs
from qualplan.dynamics._validate import check_q
from qualplan.dynamics.errors import InputError
from qualplan.dynamics.units import G0_M_S2
from qualplan.planning.errors import ValidationFailed
from qualplan.store.models import EnvironmentKind

UNITS = {
    EnvironmentKind.random: "g^2/Hz",
    EnvironmentKind.shock: "g (SRS)",
    EnvironmentKind.sine: "g peak",
    EnvironmentKind.time_history: "g",
}


@contextmanager
def core_errors(prefix: str = "data."):
    """Turn InputError of the numeric core into ValidationFailed naming the data field."""
    try:
        yield
    except InputError as exc:
        raise ValidationFailed(prefix + exc.field, exc.value, exc.rule) from exc


def _floats(data: dict, key: str) -> list[float]:
    if key not in data:
        raise ValidationFailed(f"data.{key}", None, "is required")
    value = data[key]
    if not isinstance(value, list | tuple) or not value:
        raise ValidationFailed(f"data.{key}", value, "must be a non-empty list of numbers")
    out = []
    for i, x in enumerate(value):
        if isinstance(x, bool) or not isinstance(x, int | float):
            raise ValidationFailed(f"data.{key}[{i}]", x, "must be a number")
        if not math.isfinite(float(x)):
            raise ValidationFailed(f"data.{key}[{i}]", x, "must be finite (no NaN or inf)")
        out.append(float(x))
    return out


def _number(field: str, value: Any) -> float:
    """A JSON number (not a string, not a boolean), finite."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise ValidationFailed(field, value, "must be a number (not a string or a boolean)")
    if not math.isfinite(float(value)):
        raise ValidationFailed(field, value, "must be finite (no NaN or inf)")
    return float(value)


def _positive(field: str, value: Any) -> float:
    x = _number(field, value)
    if x <= 0:
        raise ValidationFailed(field, value, "must be a finite number > 0")
    return x


def _optional_positive(data: dict, key: str) -> float | None:
    if data.get(key) is None:
        return None
    return _positive(f"data.{key}", data[key])


def _known_keys(data: dict, allowed: set[str]) -> None:
    extra = sorted(set(data) - allowed)
    if extra:
        raise ValidationFailed(
            f"data.{extra[0]}",
            data[extra[0]],
            f"is not a field of this kind; expected {sorted(allowed)}",
        )


def normalise(
    kind: EnvironmentKind, data: dict[str, Any], array: np.ndarray | None = None
) -> tuple[dict[str, Any], np.ndarray | None]:
    """Validate `data` for `kind`; return the canonical (spec, array) to store."""
    if not isinstance(data, dict):
        raise ValidationFailed("data", data, "must be an object")
    kind = EnvironmentKind(kind)
    if kind is EnvironmentKind.random and "runs" in data:
        return _random_runs(data), None
    if kind is EnvironmentKind.time_history and "run_samples" in data:
        return _record_runs(data, array)
    if kind is EnvironmentKind.random:
        _known_keys(data, {"freq_hz", "asd_g2_hz", "duration_s", "share"})
        f, a = _floats(data, "freq_hz"), _floats(data, "asd_g2_hz")
        with core_errors():
            core_psd.check_psd(f, a)
        spec = {"freq_hz": f, "asd_g2_hz": a}
        if (d := _optional_positive(data, "duration_s")) is not None:
            spec["duration_s"] = d
        _share(data, spec)
        return spec, None
    if kind is EnvironmentKind.shock:
        _known_keys(data, {"freq_hz", "accel_g", "q", "count"})
        f, a = _floats(data, "freq_hz"), _floats(data, "accel_g")
        q = _optional_positive(data, "q") or 10.0
        if q > 1000:
            raise ValidationFailed("data.q", q, "must be at most 1000 (plausibility)")
        with core_errors():
            core_srs.SrsProfile(f, a)
            check_q(q)
        spec = {"freq_hz": f, "accel_g": a, "q": q}
        if data.get("count") is not None:
            count = data["count"]
            if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= 10**6:
                raise ValidationFailed("data.count", count, "must be a whole number 1..1000000")
            spec["count"] = count
        return spec, None
    if kind is EnvironmentKind.sine:
        _known_keys(data, {"bands", "sweep", "share"})
        spec = {"bands": _sine_bands(data), "sweep": _sweep(data.get("sweep") or {})}
        _share(data, spec)
        sweep_of(spec)  # full check through the core
        _check_sine_plausible(spec)
        return spec, None
    # time history
    _known_keys(data, {"dt_s", "accel_g", "duration_s", "share"})
    dt = _optional_positive(data, "dt_s")
    if dt is None:
        raise ValidationFailed("data.dt_s", data.get("dt_s"), "is required (sample interval [s])")
    samples = (
        np.asarray(_floats(data, "accel_g"), float) if array is None else np.asarray(array, float)
    )
    if samples.ndim != 1 or samples.size < 2:
        raise ValidationFailed("data.accel_g", f"{samples.size} samples", "needs at least 2")
    bad = ~np.isfinite(samples)
    if bad.any():
        i = int(np.argmax(bad))
        raise ValidationFailed(f"data.accel_g[{i}]", float(samples[i]), "must be finite")
    spec = {"dt_s": dt}
    if (d := _optional_positive(data, "duration_s")) is not None:
        spec["duration_s"] = d
    _share(data, spec)
    return spec, samples


def _random_runs(data: dict) -> dict[str, Any]:
    """Several measured spectra (runs) of one condition: ``{"runs": [{"freq_hz",
    "asd_g2_hz"}, ...]}``. Stored with the runs and, as the environment's spectrum, their
    maximum envelope; the exposure is the condition's, counted once."""
    _known_keys(data, {"runs", "duration_s", "share"})
    runs = data["runs"]
    if not isinstance(runs, list) or len(runs) < 2:
        raise ValidationFailed("data.runs", runs if not isinstance(runs, list) else len(runs),
                               "must list at least 2 runs (one run: give freq_hz and asd_g2_hz)")
    out = []
    for i, run in enumerate(runs):
        if not isinstance(run, dict):
            raise ValidationFailed(f"data.runs[{i}]", run, "must be an object")
        try:
            spec, _ = normalise(EnvironmentKind.random, {k: run.get(k) for k in (
                "freq_hz", "asd_g2_hz")})
        except ValidationFailed as exc:
            raise ValidationFailed(f"data.runs[{i}].{exc.field.removeprefix('data.')}",
                                   exc.value, exc.rule) from exc
        out.append(spec)
    with core_errors():
        f, a = core_psd.envelope([(r["freq_hz"], r["asd_g2_hz"]) for r in out])
    spec = {"freq_hz": [float(x) for x in f], "asd_g2_hz": [float(x) for x in a],
            "runs": out}
    if (d := _optional_positive(data, "duration_s")) is not None:
        spec["duration_s"] = d
    _share(data, spec)
    return spec


def _record_runs(data: dict, array: np.ndarray | None) -> tuple[dict[str, Any], np.ndarray]:
    """Several records (runs) of one condition at one sample rate, stored end to end:
    ``{"dt_s", "accel_g" (all samples), "run_samples": [n1, n2, ...]}``."""
    counts = data["run_samples"]
    if (not isinstance(counts, list) or len(counts) < 2
            or not all(isinstance(n, int) and not isinstance(n, bool) and n >= 2
                       for n in counts)):
        raise ValidationFailed("data.run_samples", counts,
                               "must list at least 2 runs of at least 2 samples each")
    spec, samples = normalise(EnvironmentKind.time_history,
                              {k: v for k, v in data.items() if k != "run_samples"}, array)
    if sum(counts) != samples.size:
        raise ValidationFailed("data.run_samples", counts,
                               f"sum to {sum(counts)} samples, the runs hold {samples.size}")
    spec["run_samples"] = counts
    return spec, samples


def runs_of(spec: dict[str, Any], array: np.ndarray | None) -> list:
    """The runs of a revision: (freq_hz, asd_g2_hz) pairs of a random environment, sample
    arrays of a record; one run when the revision holds one."""
    if "runs" in spec:
        return [(np.asarray(r["freq_hz"]), np.asarray(r["asd_g2_hz"])) for r in spec["runs"]]
    if "run_samples" in spec:
        edges = np.cumsum([0, *spec["run_samples"]])
        x = np.asarray(array)
        return [x[a:b] for a, b in zip(edges[:-1], edges[1:], strict=True)]
    if "freq_hz" in spec and "asd_g2_hz" in spec:
        return [(np.asarray(spec["freq_hz"]), np.asarray(spec["asd_g2_hz"]))]
    return [np.asarray(array)]


def _share(data: dict, spec: dict[str, Any]) -> None:
    """The environment's share of its phase: a fraction of the phase's time, 0 < share <= 1
    (absent: the whole phase)."""
    if data.get("share") is None:
        return
    share = _number("data.share", data["share"])
    if not 0 < share <= 1:
        raise ValidationFailed("data.share", share, "must be a fraction of the phase's time, "
                               "0 < share <= 1")
    spec["share"] = share


#: Relative slack of the exposure check (durations printed to 3-4 digits; common practice).
EXPOSURE_SLACK = 1e-6


def own_duration_s(kind: EnvironmentKind, spec: dict[str, Any], samples: int | None
                   ) -> tuple[float | None, str]:
    """How long one occurrence of the environment itself lasts [s], and how that was found:
    a random spectrum's stated duration, a sweep sequence's sweep time x sweeps, a record's
    length (x its repeats when a duration is stated). None when the data state no time."""
    kind = EnvironmentKind(kind)
    if kind is EnvironmentKind.random:
        d = spec.get("duration_s")
        return d, "stated duration"
    if kind is EnvironmentKind.sine:
        sweep = sweep_of(spec)
        return sweep.duration_s, (f"{spec['sweep']['sweeps']} sweeps x "
                                  f"{sweep.duration_s / spec['sweep']['sweeps']:.4g} s")
    if kind is EnvironmentKind.time_history and samples:
        # runs are samples of one condition: the longest run is the condition's length
        record_s = max(spec.get("run_samples", [samples])) * spec["dt_s"]
        d = spec.get("duration_s")
        if d is not None and d > record_s:
            return d, f"record of {record_s:.4g} s repeated for the stated duration"
        return record_s, f"record of {record_s:.4g} s"
    return None, ""


def check_exposure(kind: EnvironmentKind, spec: dict[str, Any], samples: int | None,
                   phase_name: str | None, phase_duration_s: float | None,
                   field: str = "data") -> None:
    """Refuse an environment whose own duration exceeds its share of its phase
    (the life would hold more of it than the phase lasts)."""
    if phase_duration_s is None:
        return
    own, how = own_duration_s(kind, spec, samples)
    if own is None:
        return
    share = spec.get("share", 1.0)
    allowed = share * phase_duration_s
    if own > allowed * (1 + EXPOSURE_SLACK):
        raise ValidationFailed(
            field, f"{own:.6g} s",
            f"the environment lasts {own:.6g} s ({how}) per occurrence, more than its "
            f"share of phase {phase_name!r}: {share:g} x {phase_duration_s:.6g} s = "
            f"{allowed:.6g} s; lower the duration or the sweeps, or raise the share or the "
            "phase's duration")


#: Units a band's amplitude may be given in, per quantity -> factor to the stored unit
#: (m for displacement, m/s for velocity, g for acceleration). The first is the default,
#: as the documents print it: displacement in mm, velocity in m/s, acceleration in g.
SINE_UNITS: dict[str, dict[str, float]] = {
    "displacement": {"mm": 1e-3, "m": 1.0},
    "velocity": {"m/s": 1.0, "mm/s": 1e-3},
    "acceleration": {"g": 1.0, "m/s^2": 1.0 / G0_M_S2},
}
STORED_SINE_UNIT = {"displacement": "m", "velocity": "m/s", "acceleration": "g"}
#: Largest relative step of the peak acceleration where two bands meet (printed
#: specifications round the crossover and amplitudes to 2-3 digits; common practice).
SINE_EDGE_TOLERANCE = 0.10
#: Plausibility limits of a sine environment (common practice: beyond the stroke and force
#: of test shakers, almost always a unit slip such as metres typed for millimetres).
SINE_MAX_ACCEL_G = 500.0
SINE_MAX_DISPLACEMENT_PK_PK_M = 0.5
SINE_MAX_FREQ_HZ = 100_000.0
_BAND_KEYS = {"f_lo_hz", "f_hi_hz", "quantity", "amplitude", "measure", "unit"}
_SWEEP_KEYS = {"rate_oct_per_min", "rate_hz_per_s", "direction", "sweeps"}


def _sine_bands(data: dict) -> list[dict[str, Any]]:
    bands = data.get("bands")
    if not isinstance(bands, list) or not bands:
        raise ValidationFailed("data.bands", bands, "must be a non-empty list of bands")
    out = []
    for i, band in enumerate(bands):
        where = f"data.bands[{i}]"
        if not isinstance(band, dict):
            raise ValidationFailed(where, band, "must be an object")
        extra = sorted(set(band) - _BAND_KEYS)
        if extra:
            raise ValidationFailed(f"{where}.{extra[0]}", band[extra[0]],
                                   f"is not a field of a sine band; expected {sorted(_BAND_KEYS)}")
        quantity = band.get("quantity")
        if quantity not in SINE_UNITS:
            raise ValidationFailed(
                f"{where}.quantity",
                quantity,
                "must be 'displacement', 'velocity' or 'acceleration'",
            )
        units = SINE_UNITS[quantity]
        unit = band.get("unit", next(iter(units)))
        if unit not in units:
            raise ValidationFailed(f"{where}.unit", unit,
                                   f"must be one of {list(units)} for a {quantity} band")
        measure = band.get("measure", "peak")
        if quantity == "displacement" and measure not in ("peak", "peak_to_peak"):
            raise ValidationFailed(
                f"{where}.measure",
                measure,
                "must say 'peak' or 'peak_to_peak' for a displacement",
            )
        if quantity != "displacement" and measure != "peak":
            raise ValidationFailed(f"{where}.measure", measure,
                                   f"a {quantity} amplitude is a peak value: say 'peak' or omit it")
        f_lo = _positive(f"{where}.f_lo_hz", band.get("f_lo_hz"))
        f_hi = _positive(f"{where}.f_hi_hz", band.get("f_hi_hz"))
        if f_hi > SINE_MAX_FREQ_HZ:
            raise ValidationFailed(f"{where}.f_hi_hz", f_hi,
                                   f"must be at most {SINE_MAX_FREQ_HZ:g} Hz (plausibility)")
        amplitude = _positive(f"{where}.amplitude", band.get("amplitude"))
        item = {
            "f_lo_hz": f_lo,
            "f_hi_hz": f_hi,
            "quantity": quantity,
            "amplitude": amplitude * units[unit],
            "unit": STORED_SINE_UNIT[quantity],
        }
        if quantity == "displacement":
            item["measure"] = measure
        out.append(item)
    return out


def _sweep(sweep: dict) -> dict[str, Any]:
    if not isinstance(sweep, dict):
        raise ValidationFailed("data.sweep", sweep, "must be an object")
    extra = sorted(set(sweep) - _SWEEP_KEYS)
    if extra:
        raise ValidationFailed(f"data.sweep.{extra[0]}", sweep[extra[0]],
                               f"is not a field of a sweep; expected {sorted(_SWEEP_KEYS)}")
    direction = sweep.get("direction", "up")
    if direction not in ("up", "down", "up-down"):
        raise ValidationFailed("data.sweep.direction", direction,
                               "must be 'up', 'down' or 'up-down'")
    sweeps = sweep.get("sweeps", 1)
    if isinstance(sweeps, bool) or not isinstance(sweeps, int) or not 1 <= sweeps <= 10_000:
        raise ValidationFailed("data.sweep.sweeps", sweeps, "must be a whole number 1..10000")
    out: dict[str, Any] = {"direction": direction, "sweeps": sweeps}
    if "rate_hz_per_s" in sweep and "rate_oct_per_min" in sweep:
        raise ValidationFailed("data.sweep.rate_hz_per_s", sweep["rate_hz_per_s"],
                               "give rate_oct_per_min (logarithmic) or rate_hz_per_s "
                               "(linear), not both")
    if "rate_hz_per_s" in sweep:
        out["rate_hz_per_s"] = _positive("data.sweep.rate_hz_per_s", sweep["rate_hz_per_s"])
    else:
        out["rate_oct_per_min"] = _positive("data.sweep.rate_oct_per_min",
                                            sweep.get("rate_oct_per_min", 2.0))
    return out


def _check_sine_plausible(spec: dict[str, Any]) -> None:
    """Band-edge continuity and plausibility of a validated sine specification.

    Where two bands meet, both amplitude laws must give the same peak acceleration
    (the crossover frequency, Harris' Shock and Vibration Handbook, sinusoidal motion:
    A = (2 pi f)^2 X = 2 pi f V), within SINE_EDGE_TOLERANCE; the peak acceleration and
    the displacement must stay within what a test can apply.
    """
    table = sine_spec_of(spec)
    for i in range(1, len(table.bands)):
        a, b = table.bands[i - 1], table.bands[i]
        edge = b.f_lo_hz
        left, right = float(a.accel_g(edge)), float(b.accel_g(edge))
        step = abs(right - left) / max(left, right)
        if step > SINE_EDGE_TOLERANCE:
            raise ValidationFailed(
                f"data.bands[{i}].amplitude", spec["bands"][i]["amplitude"],
                f"the bands do not meet at {edge:g} Hz: band {i - 1} gives {left:.4g} g peak "
                f"there and band {i} {right:.4g} g peak (a step of {100 * step:.0f} %, more "
                f"than {100 * SINE_EDGE_TOLERANCE:.0f} %); check the amplitudes and their "
                "units (displacement in mm unless 'unit' says 'm')",
            )
    freq = np.geomspace(table.f_lo_hz, table.f_hi_hz, 400)
    freq = np.union1d(freq, table.breaks_hz)
    peak = float(table.accel_g(freq).max())
    if peak > SINE_MAX_ACCEL_G:
        raise ValidationFailed(
            "data.bands", f"{peak:.4g} g peak",
            f"is implausible for a sine environment (more than {SINE_MAX_ACCEL_G:g} g peak); "
            "check the units (displacement in mm unless 'unit' says 'm')",
        )
    disp = float(2.0 * table.displacement_m(freq).max())
    if disp > SINE_MAX_DISPLACEMENT_PK_PK_M:
        raise ValidationFailed(
            "data.bands", f"{disp * 1e3:.4g} mm peak-to-peak",
            f"is implausible for a sine environment (more than "
            f"{SINE_MAX_DISPLACEMENT_PK_PK_M * 1e3:g} mm peak-to-peak); check the units",
        )


def sine_spec_of(spec: dict[str, Any]) -> core_sine.SineSpec:
    bands = []
    with core_errors():
        for i, b in enumerate(spec["bands"]):
            with core_errors(f"data.bands[{i}]."):
                if b["quantity"] == "displacement":
                    bands.append(
                        core_sine.SineBand.displacement(
                            b["f_lo_hz"], b["f_hi_hz"], b["amplitude"], measure=b["measure"]
                        )
                    )
                else:
                    bands.append(
                        core_sine.SineBand(
                            b["f_lo_hz"], b["f_hi_hz"], b["quantity"], b["amplitude"]
                        )
                    )
        return core_sine.SineSpec(tuple(bands))


def sweep_of(spec: dict[str, Any]) -> core_sine.Sweep:
    sweep = spec["sweep"]
    log = "rate_oct_per_min" in sweep
    with core_errors("data.sweep."):
        return core_sine.Sweep(
            sine_spec_of(spec),
            sweep["rate_oct_per_min"] if log else sweep["rate_hz_per_s"],
            mode="log" if log else "linear",
            direction=sweep["direction"],
            n_sweeps=sweep["sweeps"],
        )


@dataclass(frozen=True)
class Summary:
    """Overall measures of one revision, each with its unit."""

    values: dict[str, dict[str, Any]]

    def as_dict(self) -> dict[str, dict[str, Any]]:
        return self.values


def summarise(kind: EnvironmentKind, spec: dict[str, Any], array: np.ndarray | None) -> Summary:
    kind = EnvironmentKind(kind)
    if kind is EnvironmentKind.random:
        f, a = spec["freq_hz"], spec["asd_g2_hz"]
        vals = {
            "grms": {"value": core_psd.grms(f, a), "unit": "g rms"},
            "peak_asd": {"value": max(a), "unit": "g^2/Hz"},
            "band": {"value": [f[0], f[-1]], "unit": "Hz"},
        }
        if "duration_s" in spec:
            vals["duration"] = {"value": spec["duration_s"], "unit": "s"}
        return Summary(vals)
    if kind is EnvironmentKind.shock:
        return Summary(
            {
                "peak_srs": {"value": max(spec["accel_g"]), "unit": "g"},
                "q": {"value": spec["q"], "unit": ""},
                "band": {"value": [spec["freq_hz"][0], spec["freq_hz"][-1]], "unit": "Hz"},
            }
        )
    if kind is EnvironmentKind.sine:
        sweep = sweep_of(spec)
        freq = np.geomspace(sweep.band_hz[0], sweep.band_hz[1], 400)
        return Summary(
            {
                "peak_accel": {"value": float(sweep.spec.accel_g(freq).max()), "unit": "g peak"},
                "band": {"value": list(sweep.band_hz), "unit": "Hz"},
                "sweep_time": {"value": sweep.duration_s, "unit": "s"},
            }
        )
    if array is None and "record" in spec:  # chunked multi-channel record (planning.records)
        rec = spec["record"]
        return Summary({
            "peak": {"value": max(s["peak"]["value"] for s in rec["stats"]), "unit": "g"},
            "rms": {"value": max(s["rms"]["value"] for s in rec["stats"]), "unit": "g rms"},
            "duration": {"value": rec["n_samples"] / rec["fs_hz"], "unit": "s"},
            "sample_rate": {"value": rec["fs_hz"], "unit": "Hz"},
            "channels": {"value": rec["n_channels"], "unit": ""},
        })
    x = np.asarray(array, float)
    return Summary(
        {
            "peak": {"value": float(np.max(np.abs(x))), "unit": "g"},
            "rms": {"value": float(np.sqrt(np.mean(x * x))), "unit": "g rms"},
            "duration": {"value": float(x.size * spec["dt_s"]), "unit": "s"},
            "sample_rate": {"value": 1.0 / spec["dt_s"], "unit": "Hz"},
        }
    )


@dataclass(frozen=True)
class RecordSpectra:
    """Spectral views of a time history: its maximax PSD and its maximax SRS."""

    psd_freq_hz: np.ndarray
    psd_g2_hz: np.ndarray
    psd_note: str
    srs_freq_hz: np.ndarray
    srs_g: np.ndarray
    q: float


#: SRS of a record: band-limited input model, peaks between samples, up to fs/5
#: (qualplan.dynamics.srs method="bandlimited"; within 0.25 % of the exact SRS of smooth
#: records up to fs/5, measured in tests/dynamics/test_srs_between_samples.py; reads high,
#: the conservative side for an environment, where a record has a step), on a 1/6-octave
#: grid (common practice) from 10 Hz to min(10 kHz, fs/5)
RECORD_SRS_METHOD = "bandlimited"
RECORD_SRS_FS_RATIO = 5.0
RECORD_SRS_POINTS_PER_OCTAVE = 6


def record_srs(x: np.ndarray, dt: float, q: float) -> tuple[np.ndarray, np.ndarray]:
    """Maximax SRS of a record [g] on its grid [Hz] (the constants above); the input
    model's accuracy warnings (steps, kinks, truncation) are issued as AccuracyWarning."""
    hi = min(10_000.0, 1.0 / (RECORD_SRS_FS_RATIO * dt))
    grid = core_srs.octave_grid(10.0, hi, RECORD_SRS_POINTS_PER_OCTAVE)
    return grid, core_srs.srs(x, dt, grid, q=q, kind="maximax", method=RECORD_SRS_METHOD)


def record_spectra(spec: dict[str, Any], array: np.ndarray, *, q: float = 10.0
                   ) -> RecordSpectra:
    """Maximax PSD (1 s windows, qualplan.dynamics.signal) up to 0.4 fs, and the maximax
    SRS at Q (:func:`record_srs`) of a record [g]."""
    from qualplan.dynamics import signal as core_signal

    x, dt = np.asarray(array, float), float(spec["dt_s"])
    with core_errors():
        window = min(1.0, 0.5 * x.size * dt)
        est = core_signal.maximax_psd(x, 1.0 / dt, window_s=window)
        keep = (est.freq_hz > 0) & (est.freq_hz <= 0.4 / dt) & (est.asd_g2_hz > 0)
        fn, values = record_srs(x, dt, q)
    note = (f"maximax of {est.n_windows} windows of {est.window_s:g} s, "
            f"{est.resolution_hz:.3g} Hz lines, {est.dof:.0f} degrees of freedom per window")
    return RecordSpectra(est.freq_hz[keep], est.asd_g2_hz[keep], note, fn, values, q)


def curve(
    kind: EnvironmentKind, spec: dict[str, Any], array: np.ndarray | None, freq_hz: np.ndarray
) -> np.ndarray | None:
    """The revision's spectral curve on `freq_hz` (PSD g^2/Hz, SRS g, sine g peak)."""
    kind = EnvironmentKind(kind)
    if kind is EnvironmentKind.random:
        return core_psd.asd_at(spec["freq_hz"], spec["asd_g2_hz"], freq_hz)
    if kind is EnvironmentKind.shock:
        return core_srs.SrsProfile(spec["freq_hz"], spec["accel_g"]).value_at(freq_hz)
    if kind is EnvironmentKind.sine:
        return sine_spec_of(spec).accel_g(freq_hz)
    return None
