"""Readers for measured time histories and spectra.

Every reader returns a small frozen dataclass in the core's units (g, g^2/Hz, Hz, s)
with the declared unit, the factor applied and the file's metadata. Units are
declared by the caller (``unit=...``), never guessed; when a file carries a unit
label that names a different known unit, the reader refuses rather than choose.

Formats: CSV (time + value columns, or one value column + a sample rate), NumPy
``.npy``, WAV (with a calibration factor), MATLAB ``.mat`` (v4-v7.2, via
scipy.io.loadmat) and the universal file format, dataset 58 (via pyuff).
"""

from __future__ import annotations

import csv
import io as _io
import math
import os
import re
import struct
import tempfile
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np

from qualplan.dynamics._validate import positive_scalar
from qualplan.dynamics.errors import InputError
from qualplan.io._units import _norm, accel_factor, asd_factor, recognised_accel

__all__ = [
    "TimeHistory",
    "Spectrum",
    "read_csv_time_history",
    "read_csv_spectrum",
    "read_npy_time_history",
    "read_wav_time_history",
    "read_mat_time_history",
    "read_uff58",
    "DEFAULT_TIME_TOLERANCE",
]

#: Largest allowed deviation of a time step from the mean step [fraction of the step].
DEFAULT_TIME_TOLERANCE = 0.01


@dataclass(frozen=True, eq=False)
class TimeHistory:
    """A uniformly sampled acceleration record.

    Attributes
    ----------
    accel_g : ndarray
        Acceleration [g] (converted from the declared unit).
    fs_hz : float
        Sample rate [Hz].
    t0_s : float
        Time of the first sample [s].
    unit : str
        Unit declared by the caller for the file's values.
    factor_to_g : float
        Factor applied: ``accel_g = file value x calibration x factor_to_g``.
    source : str
        File name (and channel/variable/record).
    metadata : Mapping
        Format-specific details (column names, file unit label, WAV dtype, ...).
    """

    accel_g: np.ndarray
    fs_hz: float
    t0_s: float
    unit: str
    factor_to_g: float
    source: str
    metadata: MappingProxyType = field(default_factory=lambda: MappingProxyType({}))

    @property
    def duration_s(self) -> float:
        """Record length ``N / fs`` [s]."""
        return self.accel_g.size / self.fs_hz


@dataclass(frozen=True, eq=False)
class Spectrum:
    """A spectrum on a frequency axis (e.g. a measured ASD).

    Attributes
    ----------
    freq_hz : ndarray
        Frequencies [Hz], strictly increasing.
    asd_g2_hz : ndarray
        ASD [g^2/Hz] (converted from the declared unit).
    unit : str
        Declared unit of the file's values.
    factor_to_g2_hz : float
        Factor applied to the file's values.
    source : str
        File name (and record).
    metadata : Mapping
        Format-specific details.
    """

    freq_hz: np.ndarray
    asd_g2_hz: np.ndarray
    unit: str
    factor_to_g2_hz: float
    source: str
    metadata: MappingProxyType = field(default_factory=lambda: MappingProxyType({}))


# ---------------------------------------------------------------------------------------------
# shared checks
# ---------------------------------------------------------------------------------------------


class _Source:
    """What a reader reads: a file path, the file's bytes, or a binary stream.

    ``file`` is what numpy and scipy read (the path, or a seekable binary stream),
    ``name`` names the source in messages and in the result's ``source``.
    """

    def __init__(self, source, name: str | None = None) -> None:
        if isinstance(source, bytes | bytearray | memoryview):
            data = bytes(source)
            self.path, self.name = None, name or "bytes"
            if not data:
                raise InputError("path", self.name, "is empty")
            self.file = _io.BytesIO(data)
        elif hasattr(source, "read"):
            self.path, self.name = None, name or str(getattr(source, "name", "stream"))
            data = source.read()
            if not data:
                raise InputError("path", self.name, "is empty")
            self.file = _io.BytesIO(data)
        else:
            p = Path(os.fspath(source))
            if not p.is_file():
                raise InputError("path", str(p), "is not an existing file")
            if p.stat().st_size == 0:
                raise InputError("path", str(p), "is empty")
            self.path, self.name, self.file = p, name or p.name, p

    def raw(self) -> bytes:
        return self.path.read_bytes() if self.path is not None else self.file.getvalue()

    def text(self) -> str:
        raw = self.raw()
        try:
            return raw.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise InputError("path", self.name, f"is not UTF-8 text (byte {exc.start})") from exc


def _path(source, name: str | None = None) -> _Source:
    return _Source(source, name)


def _finite_column(name: str, values: np.ndarray, row0: int = 0) -> np.ndarray:
    v = np.asarray(values, dtype=float)
    if v.size == 0:
        raise InputError(name, "no values", "is empty")
    bad = ~np.isfinite(v)
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(f"{name}[{i + row0}]", float(v[i]), "must be finite (no NaN or inf)")
    return v


def _check_uniform_time(name: str, t: np.ndarray, tolerance: float) -> tuple[float, float]:
    """Return (fs_hz, t0_s) of a uniform time column or raise naming the first bad step."""
    if t.size < 2:
        raise InputError(name, f"{t.size} samples", "needs at least 2 samples")
    dt = np.diff(t)
    if (dt <= 0).any():
        i = int(np.argmax(dt <= 0))
        raise InputError(f"{name}[{i + 1}]", float(t[i + 1]),
                         f"must be strictly increasing (previous {t[i]:g} s)")
    ref = float(np.median(dt))
    dev = np.abs(dt - ref) / ref
    if (dev > tolerance).any():
        i = int(np.argmax(dev > tolerance))
        kind = "gap" if dt[i] > 1.5 * ref else "irregular step"
        raise InputError(
            f"{name}[{i + 1}]", float(t[i + 1]),
            f"{kind}: step {dt[i]:.6g} s vs typical {ref:.6g} s (uniform sampling required, "
            f"tolerance {tolerance:.3g} of a step)",
        )
    mean_dt = (t[-1] - t[0]) / (t.size - 1)
    return 1.0 / mean_dt, float(t[0])


def _calibration(calibration) -> float:
    try:
        c = float(calibration)
    except (TypeError, ValueError) as exc:
        raise InputError("calibration", calibration, "must be a number") from exc
    if not math.isfinite(c) or c == 0:
        raise InputError("calibration", calibration, "must be finite and non-zero")
    return c


def _time_history(values, fs, t0, unit, calibration, source, meta, name="values"):
    factor = accel_factor(unit)
    v = _finite_column(name, values)
    if v.size < 2:
        raise InputError(name, f"{v.size} samples", "needs at least 2 samples")
    return TimeHistory(
        accel_g=v * (calibration * factor), fs_hz=fs, t0_s=t0, unit=unit,
        factor_to_g=factor, source=source, metadata=MappingProxyType(dict(meta)),
    )


# ---------------------------------------------------------------------------------------------
# CSV
# ---------------------------------------------------------------------------------------------


#: A plain decimal literal; float() would also take "2_000", "nan", "inf" and "0x10"-like
#: forms that no measurement file means.
_NUMBER = re.compile(r"[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?")
#: NaN and infinities are read, then refused by the finite check that names the cell.
_NON_FINITE = re.compile(r"[+-]?(nan|inf|infinity)", re.IGNORECASE)


def _cell_number(cell: str) -> float:
    """A cell as a number: a plain decimal literal, else ValueError."""
    text = cell.strip()
    if not _NUMBER.fullmatch(text) and not _NON_FINITE.fullmatch(text):
        raise ValueError(cell)
    return float(text)


def _read_table(p: _Source, delimiter: str | None):
    raw = p.raw()
    if b"\x00" in raw:
        raise InputError("path", p.name, "holds NUL bytes: not a text (CSV) file")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError("path", f"{p.name} byte {exc.start}",
                         "is not UTF-8 text (save the CSV as UTF-8)") from exc
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise InputError("path", p.name, "has no data rows")
    if delimiter is None:
        try:
            delimiter = csv.Sniffer().sniff(lines[0] + "\n" + "\n".join(lines[1:5]),
                                            delimiters=",;\t ").delimiter
        except csv.Error:
            delimiter = ","
    reader = csv.reader(_io.StringIO("\n".join(lines)), delimiter=delimiter,
                        skipinitialspace=True)
    rows = [[c.strip() for c in r if c.strip() != ""] if delimiter == " " else
            [c.strip() for c in r] for r in reader]
    header = None
    try:
        [_cell_number(c) for c in rows[0]]
    except ValueError:
        header = rows[0]
        rows = rows[1:]
    if not rows:
        raise InputError("path", p.name, "has a header but no data rows")
    return header, rows, delimiter


def _column(header, rows, col, what: str, first_row: int) -> tuple[str, np.ndarray]:
    ncol = len(rows[0])
    if isinstance(col, str):
        if header is None or col not in header:
            raise InputError(what, col, f"is not a column name (header: {header})")
        j = header.index(col)
        name = col
    else:
        j = int(col)
        if not -ncol <= j < ncol:
            raise InputError(what, col, f"is out of range ({ncol} columns)")
        named = header is not None and -len(header) <= j < len(header)
        name = header[j] if named else f"column {j}"
    out = np.empty(len(rows))
    for i, r in enumerate(rows):
        try:
            out[i] = _cell_number(r[j])
        except (ValueError, IndexError) as exc:
            cell = r[j] if j < len(r) else "<missing>"
            raise InputError(f"{name}[row {i + first_row}]", cell, "must be a number") from exc
    return name, out


def read_csv_time_history(path, *, name: str | None = None, unit: str, value_column=1,
                          time_column=0,
                          fs_hz: float | None = None, calibration: float = 1.0,
                          delimiter: str | None = None,
                          time_tolerance: float = DEFAULT_TIME_TOLERANCE) -> TimeHistory:
    """Read an acceleration record from CSV.

    Parameters
    ----------
    path : str, Path, bytes or a binary stream
        The file, or its content (then `name` names it in messages and in `source`).
        CSV file; an optional header row of column names; lines starting with ``#``
        are comments.
    unit : str
        Declared unit of the values (``"g"``, ``"m/s^2"``, ``"mm/s^2"``, ``"in/s^2"``,
        ``"ft/s^2"``, ``"mg"``).
    value_column : int or str
        Column of the acceleration values (index or header name).
    time_column : int, str or None
        Column of the time [s]; ``None`` when the file has values only, then `fs_hz`
        is required.
    fs_hz : float, optional
        Sample rate [Hz] when there is no time column (must be omitted otherwise).
    calibration : float
        Factor applied to the values before unit conversion [unit per file value].
    delimiter : str, optional
        Field separator; sniffed from ``, ; tab space`` when omitted.
    time_tolerance : float
        Largest deviation of a time step from the mean step [fraction of a step].

    Returns
    -------
    TimeHistory

    Raises
    ------
    InputError
        Empty file, non-numeric or NaN cells (naming column and row), a time column
        that is not strictly increasing, has a gap or is irregular, an undeclared unit.

    References
    ----------
    RFC 4180 (CSV); Python csv module dialect sniffing.
    """
    p = _path(path, name)
    header, rows, delim = _read_table(p, delimiter)
    first = 2 if header is not None else 1
    vname, v = _column(header, rows, value_column, "value_column", first)
    bad = ~np.isfinite(v)
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(f"{vname}[row {i + first}]", float(v[i]),
                         "must be finite (no NaN or inf)")
    meta: dict[str, Any] = {"format": "csv", "value_column": vname, "delimiter": delim,
                            "header": header}
    width = max(len(r) for r in rows)
    if time_column is None:
        if fs_hz is None:
            raise InputError("fs_hz", None, "is required when the file has no time column")
        if width > 1:
            named = f" (header {header})" if header is not None else ""
            raise InputError(
                "fs_hz", fs_hz,
                f"is given, but the file has {width} columns{named}: a sample rate is for a "
                "file of one value column; for a time column and a value column omit it")
        fs, t0 = positive_scalar("fs_hz", fs_hz), 0.0
    else:
        if fs_hz is not None:
            raise InputError("fs_hz", fs_hz, "must be omitted when a time column is read")
        if width > 2 and value_column == 1:  # a column chosen by name or index is meant
            raise InputError("path", p.name,
                             f"has {width} columns; a record is read from (time, value): "
                             "remove the other columns")
        tname, t = _column(header, rows, time_column, "time_column", first)
        _finite_column(tname, t)
        fs, t0 = _check_uniform_time(tname, t, time_tolerance)
        meta["time_column"] = tname
    return _time_history(v, fs, t0, unit, _calibration(calibration), p.name, meta, vname)


def read_csv_spectrum(path, *, name: str | None = None, unit: str, freq_column=0, value_column=1,
                      delimiter: str | None = None) -> Spectrum:
    """Read an acceleration spectral density (frequency, ASD) from CSV.

    Parameters
    ----------
    path : str, Path, bytes or a binary stream
        The file, or its content (then `name` names it in messages and in `source`).
        CSV file (optional header, ``#`` comments).
    unit : str
        Declared ASD unit: ``"g^2/Hz"``, ``"(m/s^2)^2/Hz"``, ``"(in/s^2)^2/Hz"``.
    freq_column, value_column : int or str
        Columns of frequency [Hz] and ASD.
    delimiter : str, optional
        Field separator (sniffed when omitted).

    Returns
    -------
    Spectrum
        Frequencies strictly increasing and > 0, ASD finite and >= 0.

    References
    ----------
    RFC 4180 (CSV).
    """
    p = _path(path, name)
    factor = asd_factor(unit)
    header, rows, delim = _read_table(p, delimiter)
    first = 2 if header is not None else 1
    fname, f = _column(header, rows, freq_column, "freq_column", first)
    vname, v = _column(header, rows, value_column, "value_column", first)
    f = _finite_column(fname, f)
    v = _finite_column(vname, v)
    return _spectrum(f, v, fname, vname, unit, factor, p.name,
                     {"format": "csv", "delimiter": delim, "header": header})


def _spectrum(f, v, fname, vname, unit, factor, source, meta) -> Spectrum:
    if f.size < 2:
        raise InputError(fname, f"{f.size} lines", "needs at least 2 lines")
    if (f <= 0).any():
        i = int(np.argmax(f <= 0))
        raise InputError(f"{fname}[{i}]", float(f[i]), "must be > 0 Hz (drop the DC line)")
    d = np.diff(f)
    if (d <= 0).any():
        i = int(np.argmax(d <= 0))
        raise InputError(f"{fname}[{i + 1}]", float(f[i + 1]),
                         f"must be strictly increasing (previous {f[i]:g} Hz)")
    if (v < 0).any():
        i = int(np.argmax(v < 0))
        raise InputError(f"{vname}[{i}]", float(v[i]), "must be >= 0")
    return Spectrum(freq_hz=f, asd_g2_hz=v * factor, unit=unit, factor_to_g2_hz=factor,
                    source=source, metadata=MappingProxyType(dict(meta)))


# ---------------------------------------------------------------------------------------------
# NumPy, WAV, MATLAB
# ---------------------------------------------------------------------------------------------


def read_npy_time_history(path, *, name: str | None = None, fs_hz: float, unit: str,
                          calibration: float = 1.0) -> TimeHistory:
    """Read a 1-D acceleration record from a NumPy ``.npy`` file.

    Parameters
    ----------
    path : str, Path, bytes or a binary stream
        The file, or its content (then `name` names it in messages and in `source`).
        ``.npy`` file holding a 1-D numeric array (no pickles).
    fs_hz : float
        Sample rate [Hz].
    unit : str
        Declared unit of the values.
    calibration : float
        Factor applied before unit conversion.

    Returns
    -------
    TimeHistory

    References
    ----------
    NumPy .npy format (numpy.lib.format), read with allow_pickle=False.
    """
    p = _path(path, name)
    try:
        arr = np.load(p.file, allow_pickle=False)
    except Exception as exc:  # numpy raises ValueError, EOFError, BadZipFile, ... on bad files
        raise InputError("path", p.name, f"is not a readable .npy array "
                         f"({type(exc).__name__}: {exc})") from exc
    if not isinstance(arr, np.ndarray):  # an .npz archive (or other) under an .npy name
        if hasattr(arr, "close"):
            arr.close()
        raise InputError("path", p.name, "is not a .npy array (an .npz archive?): save one "
                         "array with numpy.save")
    if arr.ndim != 1:
        raise InputError("values", f"shape {arr.shape}", "must be a 1-D array")
    if not np.issubdtype(arr.dtype, np.number) or np.iscomplexobj(arr):
        raise InputError("values", str(arr.dtype), "must be real numbers")
    return _time_history(arr, positive_scalar("fs_hz", fs_hz), 0.0, unit,
                         _calibration(calibration), p.name,
                         {"format": "npy", "dtype": str(arr.dtype)})


def read_wav_time_history(path, *, name: str | None = None, calibration: float, unit: str,
                          channel: int = 0) -> TimeHistory:
    """Read one channel of a WAV file with a calibration factor.

    Parameters
    ----------
    path : str, Path, bytes or a binary stream
        The file, or its content (then `name` names it in messages and in `source`).
        WAV file (PCM 8/16/24/32-bit integer or 32/64-bit float).
    calibration : float
        Engineering value per file count [unit per count] for integer files, per
        unit of the float samples for float files (e.g. 1 V full scale and a 10 mV/g
        accelerometer on a 16-bit file: ``100 / 32768`` g per count).
    unit : str
        Declared unit of ``count x calibration``.
    channel : int
        Channel to read (0-based).

    Returns
    -------
    TimeHistory
        Metadata holds the WAV dtype, channel count and channel read.

    References
    ----------
    Microsoft RIFF WAVE format, read by scipy.io.wavfile.
    """
    from scipy.io import wavfile

    p = _path(path, name)
    cal = _calibration(calibration)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            fs, data = wavfile.read(p.file)
        except Exception as exc:  # scipy's WAV parser raises many kinds on a corrupt file
            raise InputError("path", p.name, f"is not a readable WAV file ({exc})") from exc
    for w in caught:
        text = str(w.message)
        if "truncat" in text.lower() or "reached eof" in text.lower() or "not enough" in text:
            raise InputError("path", p.name, f"is a truncated WAV file ({text})")
    _check_wav_length(p)
    if not isinstance(fs, int | np.integer) or fs <= 0:
        raise InputError("sample_rate", int(fs), "the WAV header's sample rate must be > 0 Hz")
    if data.ndim not in (1, 2) or data.size == 0:
        raise InputError("path", p.name, "holds no samples")
    n_ch = 1 if data.ndim == 1 else data.shape[1]
    if not isinstance(channel, int) or not 0 <= channel < n_ch:
        raise InputError("channel", channel, f"must be 0..{n_ch - 1}")
    x = data if data.ndim == 1 else data[:, channel]
    if x.dtype == np.uint8:  # 8-bit WAV is unsigned with offset 128
        x = x.astype(float) - 128.0
    return _time_history(x.astype(float), float(fs), 0.0, unit, cal, f"{p.name}[ch {channel}]",
                         {"format": "wav", "dtype": str(data.dtype), "channels": n_ch,
                          "channel": channel})


def _check_wav_length(p: _Source) -> None:
    """Refuse a WAV whose data chunk declares more bytes than the file holds.

    RIFF chunks are (4-byte id, little-endian uint32 size, data); a recorder cut off or a
    partial copy leaves a `data` chunk shorter than its size (Microsoft RIFF WAVE format).
    """
    raw = p.raw()
    pos = 12
    while pos + 8 <= len(raw):
        cid, size = raw[pos:pos + 4], struct.unpack("<I", raw[pos + 4:pos + 8])[0]
        if cid == b"data":
            have = len(raw) - pos - 8
            if size > have:
                raise InputError("path", p.name, f"is a truncated WAV file: its data chunk "
                                 f"declares {size} bytes, the file holds {have}")
            return
        pos += 8 + size + (size & 1)


def read_mat_time_history(path, *, name: str | None = None, variable: str, unit: str,
                          fs_hz: float | None = None,
                          time_variable: str | None = None, calibration: float = 1.0,
                          time_tolerance: float = DEFAULT_TIME_TOLERANCE) -> TimeHistory:
    """Read an acceleration record from a MATLAB ``.mat`` file (v4 to v7.2).

    Parameters
    ----------
    path : str, Path, bytes or a binary stream
        The file, or its content (then `name` names it in messages and in `source`).
        ``.mat`` file.
    variable : str
        Name of the vector of values.
    unit : str
        Declared unit of the values.
    fs_hz : float, optional
        Sample rate [Hz]; or give `time_variable`.
    time_variable : str, optional
        Name of a time vector [s] (checked uniform like a CSV time column).
    calibration : float
        Factor applied before unit conversion.
    time_tolerance : float
        Largest deviation of a time step from the mean step [fraction of a step].

    Returns
    -------
    TimeHistory

    References
    ----------
    MATLAB MAT-file format v4-v7.2, read by scipy.io.loadmat.
    """
    from scipy.io import loadmat

    p = _path(path, name)
    try:
        mat = loadmat(p.file, squeeze_me=True)
    except NotImplementedError as exc:
        raise InputError("path", p.name, "is a v7.3 (HDF5) .mat file; save with -v7") from exc
    except Exception as exc:  # scipy's MAT parser raises many kinds on a corrupt file
        raise InputError("path", p.name, f"is not a readable .mat file "
                         f"({type(exc).__name__}: {exc})") from exc
    names = sorted(k for k in mat if not k.startswith("__"))

    def vector(name: str, what: str) -> np.ndarray:
        if name not in mat:
            raise InputError(what, name, f"is not in the file (variables: {names})")
        a = np.asarray(mat[name])
        if a.ndim != 1 or not np.issubdtype(a.dtype, np.number) or np.iscomplexobj(a):
            raise InputError(what, f"{name}: shape {a.shape}, {a.dtype}",
                             "must be a real numeric vector")
        return a.astype(float)

    v = vector(variable, "variable")
    meta: dict[str, Any] = {"format": "mat", "variable": variable, "variables": names}
    if (fs_hz is None) == (time_variable is None):
        raise InputError("fs_hz", fs_hz, "give exactly one of fs_hz or time_variable")
    if time_variable is not None:
        t = _finite_column(time_variable, vector(time_variable, "time_variable"))
        if t.size != v.size:
            raise InputError("time_variable", f"{t.size} samples",
                             f"must match {variable} ({v.size})")
        fs, t0 = _check_uniform_time(time_variable, t, time_tolerance)
        meta["time_variable"] = time_variable
    else:
        fs, t0 = positive_scalar("fs_hz", fs_hz), 0.0
    return _time_history(v, fs, t0, unit, _calibration(calibration), f"{p.name}:{variable}",
                         meta, variable)


# ---------------------------------------------------------------------------------------------
# Universal file format, dataset 58
# ---------------------------------------------------------------------------------------------

_UFF_TIME = 1       # function type: time response
_UFF_PSD = 9        # function type: power spectral density
_UFF_SPECTRUM = 12  # function type: spectrum (treated as ASD only if declared so)


def _uff_sets(pyuff, p: _Source):
    """pyuff reads named files only: bytes and streams go through a private temp file."""
    if p.path is not None:
        return pyuff.UFF(str(p.path)).read_sets()
    with tempfile.TemporaryDirectory() as tmp:
        f = Path(tmp) / "upload.uff"
        f.write_bytes(p.file.getvalue())
        return pyuff.UFF(str(f)).read_sets()


def read_uff58(path, *, name: str | None = None, unit: str, record: int = 0,
               time_tolerance: float = DEFAULT_TIME_TOLERANCE) -> TimeHistory | Spectrum:
    """Read one dataset 58 record of a universal file (UFF/UNV), via pyuff.

    Parameters
    ----------
    path : str, Path, bytes or a binary stream
        The file, or its content (then `name` names it in messages and in `source`).
        Universal file (ASCII or binary dataset 58).
    unit : str
        Declared unit of the ordinate: an acceleration unit for a time response
        (function type 1), an ASD unit for a PSD (function type 9 or 12).
    record : int
        Index among the file's dataset-58 records (0-based).
    time_tolerance : float
        For uneven abscissae: largest step deviation [fraction of a step].

    Returns
    -------
    TimeHistory or Spectrum
        By the record's function type. Metadata holds the response node/direction,
        ids and the file's unit labels. A file unit label naming a different known
        acceleration unit than `unit` is an error (units are never chosen silently).

    References
    ----------
    Universal file format, dataset 58 (function at nodal DOF), I-DEAS/SDRC
    definition as implemented by pyuff (ladisk/pyuff).
    """
    import pyuff

    p = _path(path, name)
    try:
        sets = _uff_sets(pyuff, p)
    except Exception as exc:  # pyuff raises bare Exceptions on malformed files
        raise InputError("path", p.name, f"is not a readable universal file ({exc})") from exc
    sets = sets if isinstance(sets, list) else [sets]
    s58 = [s for s in sets if s.get("type") == 58]
    if not s58:
        raise InputError("path", p.name, "holds no dataset 58 record")
    if not isinstance(record, int) or not 0 <= record < len(s58):
        raise InputError("record", record, f"must be 0..{len(s58) - 1}")
    s = s58[record]
    ft = int(s.get("func_type", -1))
    label = str(s.get("ordinate_axis_units_lab", "")).strip()
    meta = {
        "format": "uff58", "record": record, "func_type": ft,
        "id1": s.get("id1"), "rsp_node": s.get("rsp_node"), "rsp_dir": s.get("rsp_dir"),
        "ordinate_units_label": label,
        "abscissa_units_label": str(s.get("abscissa_axis_units_lab", "")).strip(),
    }
    data = np.asarray(s.get("data"))
    if np.iscomplexobj(data):
        raise InputError("data", "complex ordinate", "must be real (time response or PSD)")
    x = np.asarray(s.get("x"), dtype=float)
    y = _finite_column("data", data.astype(float))
    if x.size != y.size:
        raise InputError("x", f"{x.size} abscissae", f"must match data ({y.size})")
    source = f"{p.name}[58 #{record}]"
    if ft == _UFF_TIME:
        file_unit = recognised_accel(label)
        accel_factor(unit)
        if file_unit is not None and file_unit != _norm(unit):
            raise InputError("unit", unit, f"differs from the file's ordinate label {label!r}")
        if int(s.get("abscissa_spacing", 0)) == 1 and float(s.get("abscissa_inc", 0)) > 0:
            fs, t0 = 1.0 / float(s["abscissa_inc"]), float(s.get("abscissa_min", 0.0))
        else:
            fs, t0 = _check_uniform_time("x", _finite_column("x", x), time_tolerance)
        return _time_history(y, fs, t0, unit, 1.0, source, meta, "data")
    if ft in (_UFF_PSD, _UFF_SPECTRUM):
        factor = asd_factor(unit)
        xf = _finite_column("x", x)
        keep = xf > 0  # a DC line at 0 Hz is dropped (recorded in the metadata)
        meta["dropped_dc_line"] = bool((~keep).any())
        return _spectrum(xf[keep], y[keep], "x", "data", unit, factor, source, meta)
    raise InputError("func_type", ft,
                     "must be 1 (time response), 9 (PSD) or 12 (spectrum) for this reader")
