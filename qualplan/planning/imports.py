"""Environment data and test records from files: JSON and CSV breakpoint tables here,
measured records and spectra through the readers of ``qualplan.io``.

Units are declared by the caller, never guessed: a JSON file names them in its keys
(``freq_hz``, ``asd_g2_hz``, ``accel_g``); a CSV table is read with the units the
user chose (``value_units``), converted here to the core's g-based units.
"""

from __future__ import annotations

import csv
import io
import json
import math
from typing import Any

import numpy as np

from qualplan.dynamics.units import G0_M_S2
from qualplan.planning.errors import ValidationFailed
from qualplan.store.models import EnvironmentKind

#: Accepted value units per kind, with the factor to the core unit.
VALUE_UNITS: dict[EnvironmentKind, dict[str, float]] = {
    EnvironmentKind.random: {"g^2/Hz": 1.0, "(m/s^2)^2/Hz": 1.0 / G0_M_S2**2},
    EnvironmentKind.shock: {"g": 1.0, "m/s^2": 1.0 / G0_M_S2},
    EnvironmentKind.sine: {"g": 1.0, "m/s^2": 1.0 / G0_M_S2},
    EnvironmentKind.time_history: {"g": 1.0, "m/s^2": 1.0 / G0_M_S2},
}
VALUE_KEY = {
    EnvironmentKind.random: "asd_g2_hz",
    EnvironmentKind.shock: "accel_g",
    EnvironmentKind.sine: "accel_g",
    EnvironmentKind.time_history: "accel_g",
}


def _factor(kind: EnvironmentKind, value_units: str | None) -> float:
    choices = VALUE_UNITS[kind]
    if value_units is None:
        raise ValidationFailed(
            "value_units", None, f"say the units of the values: one of {sorted(choices)}"
        )
    if value_units not in choices:
        raise ValidationFailed(
            "value_units",
            value_units,
            f"not a unit for {kind.value} data; use one of {sorted(choices)}",
        )
    return choices[value_units]


def breakpoints_from_csv(
    kind: EnvironmentKind, content: bytes, *, value_units: str | None, freq_units: str = "Hz"
) -> dict[str, Any]:
    """A two-column table (frequency, value) with an optional header line."""
    if freq_units not in ("Hz", "kHz"):
        raise ValidationFailed("freq_units", freq_units, "must be 'Hz' or 'kHz'")
    factor = _factor(kind, value_units)
    text = _text(content)
    rows = [r for r in csv.reader(io.StringIO(text)) if r and not r[0].lstrip().startswith("#")]
    if rows and not _is_number(rows[0][0]):
        rows = rows[1:]
    if len(rows) < 2:
        raise ValidationFailed("file", f"{len(rows)} data rows", "needs at least 2 breakpoints")
    freq, vals = [], []
    for i, row in enumerate(rows, start=1):
        if len(row) < 2:
            raise ValidationFailed(f"row {i}", ",".join(row), "needs two columns: frequency, value")
        for j, cell in enumerate(row[:2]):
            if not _is_number(cell):
                raise ValidationFailed(f"row {i} column {j + 1}", cell, "is not a number")
        freq.append(float(row[0]) * (1000.0 if freq_units == "kHz" else 1.0))
        vals.append(float(row[1]) * factor)
    data: dict[str, Any] = {"freq_hz": freq, VALUE_KEY[kind]: vals}
    return data


def data_from_json(content: bytes) -> dict[str, Any]:
    """A JSON object in the form of RevisionIn.data (units in the key names)."""
    try:
        value = json.loads(_text(content))
    except json.JSONDecodeError as exc:
        raise ValidationFailed(
            "file", f"line {exc.lineno} column {exc.colno}", f"is not valid JSON: {exc.msg}"
        ) from exc
    if not isinstance(value, dict):
        raise ValidationFailed("file", type(value).__name__, "must hold a JSON object")
    return value


def environment_data_from_file(
    kind: EnvironmentKind,
    filename: str,
    content: bytes,
    *,
    value_units: str | None = None,
    freq_units: str = "Hz",
    sample_rate_hz: float | None = None,
    calibration: float | None = None,
) -> tuple[dict[str, Any], np.ndarray | None]:
    """Turn an uploaded file into (data, array) for a revision of `kind`."""
    if not content:
        raise ValidationFailed("file", filename, "is empty")
    name = filename.lower()
    kind = EnvironmentKind(kind)
    if name.endswith(".json"):
        return data_from_json(content), None
    if kind is not EnvironmentKind.time_history:
        if name.endswith((".csv", ".txt")):
            return breakpoints_from_csv(
                kind, content, value_units=value_units, freq_units=freq_units
            ), None
        raise ValidationFailed(
            "file", filename, f"{kind.value} data are read from .json or .csv tables"
        )
    return _time_history(
        filename,
        content,
        value_units=value_units,
        sample_rate_hz=sample_rate_hz,
        calibration=calibration,
    )


def _time_history(
    filename: str,
    content: bytes,
    *,
    value_units: str | None,
    sample_rate_hz: float | None,
    calibration: float | None,
):
    from qualplan import io as qio

    factor = _factor(EnvironmentKind.time_history, value_units)
    from qualplan.planning.envdata import core_errors

    with core_errors(""):
        rec = qio.read_time_history_bytes(
            filename,
            content,
            units=value_units,
            sample_rate_hz=sample_rate_hz,
            calibration=calibration,
        )
    samples = np.asarray(rec.accel_g, float)
    if not math.isclose(factor, 1.0) and not getattr(rec, "converted", True):
        samples = samples * factor
    return {"dt_s": 1.0 / rec.sample_rate_hz}, samples


def _text(content: bytes) -> str:
    try:
        return content.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ValidationFailed("file", f"byte {exc.start}", "is not UTF-8 text") from exc


def _is_number(cell: str) -> bool:
    try:
        x = float(cell)
    except ValueError:
        return False
    return math.isfinite(x)
