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
from pathlib import Path
from typing import Any

import numpy as np

from qualplan import io as qio
from qualplan.io._units import ACCEL_UNITS, ASD_UNITS
from qualplan.planning.envdata import core_errors
from qualplan.planning.errors import ValidationFailed
from qualplan.planning.inputs import parse_number
from qualplan.store.models import EnvironmentKind

#: Accepted value units per kind, with the factor to the core unit: the io readers' one
#: table (qualplan.io._units), so a unit a record reader takes is one a table takes too.
VALUE_UNITS: dict[EnvironmentKind, dict[str, float]] = {
    EnvironmentKind.random: dict(ASD_UNITS),
    EnvironmentKind.shock: dict(ACCEL_UNITS),
    EnvironmentKind.sine: dict(ACCEL_UNITS),
    EnvironmentKind.time_history: dict(ACCEL_UNITS),
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
        while len(row) > 2 and not row[-1].strip():
            row = row[:-1]  # trailing empty cells of a spreadsheet export
        if len(row) != 2:
            raise ValidationFailed(f"row {i}", ",".join(row),
                                   f"has {len(row)} columns; a breakpoint table has two: "
                                   "frequency, value")
        for j, cell in enumerate(row):
            if not _is_number(cell):
                raise ValidationFailed(f"row {i} column {j + 1}", cell,
                                       "is not a number (a plain decimal such as 2000 or 2e3)")
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


def environment_data_from_file(kind: EnvironmentKind, filename: str, content: bytes, *,
                               value_units: str | None = None, freq_units: str = "Hz",
                               sample_rate_hz: float | None = None,
                               calibration: float | None = None,
                               variable: str | None = None
                               ) -> tuple[dict[str, Any], np.ndarray | None]:
    """Turn an uploaded file into (data, array) for a revision of `kind`.

    Breakpoint tables (.json, .csv) for random, shock and sine data; records
    (.csv with a time column or one column plus `sample_rate_hz`, .npy, .wav with a
    `calibration`, .mat with a `variable`, .uff/.unv dataset 58) for time histories;
    a dataset 58 spectrum is also accepted as random data.
    """
    if not content:
        raise ValidationFailed("file", filename, "is empty")
    name = filename.lower()
    kind = EnvironmentKind(kind)
    if name.endswith(".json"):
        return data_from_json(content), None
    if kind is EnvironmentKind.time_history:
        return _time_history(filename, content, value_units=value_units,
                             sample_rate_hz=sample_rate_hz, calibration=calibration,
                             variable=variable)
    if name.endswith((".csv", ".txt")):
        return breakpoints_from_csv(kind, content, value_units=value_units,
                                    freq_units=freq_units), None
    if kind is EnvironmentKind.random and name.endswith((".uff", ".unv")):
        spectrum = _read_record(filename, content, value_units=value_units)
        if not isinstance(spectrum, qio.Spectrum):
            raise ValidationFailed("file", filename, "holds a time record, not a spectrum")
        return {"freq_hz": spectrum.freq_hz.tolist(),
                "asd_g2_hz": spectrum.asd_g2_hz.tolist()}, None
    raise ValidationFailed("file", filename,
                           f"{kind.value} data are read from .json or .csv tables")


RECORD_SUFFIXES = (".csv", ".txt", ".npy", ".wav", ".mat", ".uff", ".unv")


def _read_record(filename: str, content: bytes, *, value_units: str | None,
                 sample_rate_hz: float | None = None, calibration: float | None = None,
                 variable: str | None = None):
    """Read a record's bytes with qualplan.io (the readers take bytes and name them)."""
    suffix = Path(filename).suffix.lower()
    if suffix not in RECORD_SUFFIXES:
        raise ValidationFailed("file", filename,
                               f"unknown record format; use one of {', '.join(RECORD_SUFFIXES)}")
    if value_units is None:
        raise ValidationFailed("value_units", None,
                               "say the units of the record's values (g, m/s^2, ...)")
    cal = 1.0 if calibration is None else calibration
    src = {"path": content, "name": filename, "unit": value_units}
    with core_errors(""):
        if suffix in (".csv", ".txt"):
            if sample_rate_hz is not None:
                return qio.read_csv_time_history(**src, time_column=None, value_column=0,
                                                 fs_hz=sample_rate_hz, calibration=cal)
            return qio.read_csv_time_history(**src, calibration=cal)
        if suffix == ".npy":
            if sample_rate_hz is None:
                raise ValidationFailed("sample_rate_hz", None, "is required for .npy")
            return qio.read_npy_time_history(**src, fs_hz=sample_rate_hz, calibration=cal)
        if suffix == ".wav":
            if calibration is None:
                raise ValidationFailed("calibration", None,
                                       "is required for .wav (units per full-scale count)")
            return qio.read_wav_time_history(**src, calibration=cal)
        if suffix == ".mat":
            if variable is None:
                raise ValidationFailed("variable", None, "name the variable of the .mat file")
            return qio.read_mat_time_history(**src, variable=variable, fs_hz=sample_rate_hz,
                                             calibration=cal)
        return qio.read_uff58(**src)


def _time_history(filename: str, content: bytes, *, value_units: str | None,
                  sample_rate_hz: float | None, calibration: float | None,
                  variable: str | None) -> tuple[dict[str, Any], np.ndarray]:
    rec = _read_record(filename, content, value_units=value_units,
                       sample_rate_hz=sample_rate_hz, calibration=calibration,
                       variable=variable)
    if not isinstance(rec, qio.TimeHistory):
        raise ValidationFailed("file", filename, "holds a spectrum, not a time record")
    return {"dt_s": 1.0 / rec.fs_hz}, np.asarray(rec.accel_g, float)


def _text(content: bytes) -> str:
    nul = content.find(b"\x00")
    if nul >= 0:
        raise ValidationFailed("file", f"byte {nul}", "holds a NUL byte: not a text file")
    try:
        return content.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ValidationFailed("file", f"byte {exc.start}",
                               "is not UTF-8 text (save the file as UTF-8)") from exc


def _is_number(cell: str) -> bool:
    """A plain finite decimal literal (not ``2_000``, ``nan`` or ``inf``)."""
    try:
        parse_number("cell", cell)
    except ValidationFailed:
        return False
    return True
