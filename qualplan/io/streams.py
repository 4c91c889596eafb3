"""Streaming readers: multi-channel records read in chunks, channels by column.

Each ``open_*`` function checks the file and its declared units at once and returns a
:class:`RecordSource`; :meth:`RecordSource.chunks` then yields arrays of shape
``(m, n_channels)`` in g, ``m <= chunk_samples``, so no step needs the whole record in
memory. A 2-D array in a file is channels by column (one row per sample).

Formats and how much each holds in memory:

- CSV: read ``chunk_samples`` rows at a time (a first pass counts rows and checks a
  time column, if any, for uniform sampling);
- NumPy ``.npy``: memory-mapped (the operating system pages the file in);
- WAV: memory-mapped by scipy.io.wavfile (8/16/32-bit integer and float PCM; 24-bit
  files are read whole, as scipy cannot map them);
- MATLAB ``.mat``: v7.3 (HDF5) is sliced through h5py; v4-v7.2 files are read by
  scipy.io.loadmat, which loads the one variable asked for whole (those formats are
  compressed or unindexed and cannot be sliced);
- HDF5: a dataset sliced through h5py;
- UFF dataset 58: several time records of one rate and length become the channels
  (pyuff parses the whole file; ASCII UFF cannot be read any other way).

Units are declared by the caller, never guessed; ``calibration`` is one factor or
one per channel.
"""

from __future__ import annotations

import csv
import math
import os
import warnings
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType

import numpy as np

from qualplan.dynamics._validate import positive_scalar
from qualplan.dynamics.errors import InputError
from qualplan.io._units import _norm, accel_factor, recognised_accel

__all__ = [
    "RecordSource",
    "open_record",
    "open_csv_record",
    "open_npy_record",
    "open_wav_record",
    "open_mat_record",
    "open_hdf5_record",
    "open_uff58_record",
    "DEFAULT_CHUNK_SAMPLES",
]

#: Samples per chunk when the caller does not choose (2^16 rows).
DEFAULT_CHUNK_SAMPLES = 65_536

_TIME_TOLERANCE = 0.01


@dataclass(frozen=True, eq=False)
class RecordSource:
    """A uniformly sampled multi-channel record that can be read in chunks.

    Attributes
    ----------
    fs_hz : float
        Sample rate [Hz].
    t0_s : float
        Time of the first sample [s].
    n_samples : int
        Samples per channel [count].
    channel_names : tuple of str
        One name per channel (column names, variable columns, UFF record ids).
    unit : str
        Unit declared for the file's values.
    factors_to_g : tuple of float
        Per channel: ``accel_g = file value x factor`` (calibration x unit factor).
    source : str
        File name (and variable or dataset).
    metadata : Mapping
        Format details (dtype, memory-mapped or not, ...).
    """

    fs_hz: float
    t0_s: float
    n_samples: int
    channel_names: tuple[str, ...]
    unit: str
    factors_to_g: tuple[float, ...]
    source: str
    _blocks: Callable[[int], Iterator[np.ndarray]] = field(repr=False)
    metadata: MappingProxyType = field(default_factory=lambda: MappingProxyType({}))

    @property
    def n_channels(self) -> int:
        """Number of channels [count]."""
        return len(self.channel_names)

    @property
    def duration_s(self) -> float:
        """``n_samples / fs`` [s]."""
        return self.n_samples / self.fs_hz

    def chunks(self, chunk_samples: int = DEFAULT_CHUNK_SAMPLES) -> Iterator[np.ndarray]:
        """Yield the record in order as float64 arrays ``(m, n_channels)`` in g.

        Parameters
        ----------
        chunk_samples : int
            Rows per chunk (the last one may be shorter) [samples].

        Raises
        ------
        InputError
            A NaN or infinite value, naming the channel and the sample index.
        """
        if not isinstance(chunk_samples, int) or chunk_samples < 1:
            raise InputError("chunk_samples", chunk_samples, "must be an integer >= 1")
        f = np.asarray(self.factors_to_g)
        i0 = 0
        for block in self._blocks(chunk_samples):
            raw = np.asarray(block, dtype=float)
            if raw.ndim == 1:
                raw = raw[:, None]
            bad = ~np.isfinite(raw)
            if bad.any():
                r, c = np.argwhere(bad)[0]
                raise InputError(f"{self.channel_names[c]}[{i0 + r}]", float(raw[r, c]),
                                 "must be finite (no NaN or inf)")
            i0 += raw.shape[0]
            yield raw * f


def _slicer(read: Callable[[int, int], np.ndarray], n: int):
    """Blocks of an indexable record: read(i0, i1) for consecutive ranges."""
    def blocks(rows: int):
        for i0 in range(0, n, rows):
            yield read(i0, min(n, i0 + rows))
    return blocks


# ---------------------------------------------------------------------------------------------
# shared checks


def _path(path) -> Path:
    p = Path(os.fspath(path))
    if not p.is_file():
        raise InputError("path", str(p), "is not an existing file")
    if p.stat().st_size == 0:
        raise InputError("path", str(p), "is empty")
    return p


def _factors(unit: str, calibration, n_ch: int) -> tuple[float, ...]:
    u = accel_factor(unit)
    cal = np.atleast_1d(np.asarray(calibration, dtype=object))
    if cal.size == 1:
        cal = np.repeat(cal, n_ch)
    if cal.size != n_ch:
        raise InputError("calibration", list(cal), f"must be one factor or {n_ch} (one per "
                         "channel)")
    out = []
    for i, c in enumerate(cal):
        try:
            cv = float(c)
        except (TypeError, ValueError) as exc:
            raise InputError(f"calibration[{i}]", c, "must be a number") from exc
        if not math.isfinite(cv) or cv == 0:
            raise InputError(f"calibration[{i}]", c, "must be finite and non-zero")
        out.append(cv * u)
    return tuple(out)


def _names(names, n_ch: int, default: Sequence[str]) -> tuple[str, ...]:
    if names is None:
        return tuple(default)
    names = tuple(str(n) for n in names)
    if len(names) != n_ch:
        raise InputError("channel_names", list(names), f"must name {n_ch} channels")
    if len(set(names)) != n_ch:
        raise InputError("channel_names", list(names), "must be distinct")
    return names


def _array_shape(what: str, shape, dtype) -> tuple[int, int]:
    if len(shape) not in (1, 2):
        raise InputError(what, f"shape {tuple(shape)}",
                         "must be 1-D (one channel) or 2-D (samples x channels)")
    if not (np.issubdtype(dtype, np.integer) or np.issubdtype(dtype, np.floating)):
        raise InputError(what, str(dtype), "must be real numbers")
    n = int(shape[0])
    n_ch = 1 if len(shape) == 1 else int(shape[1])
    if n < 2:
        raise InputError(what, f"{n} samples", "needs at least 2 samples")
    if n_ch < 1:
        raise InputError(what, f"shape {tuple(shape)}", "has no channel")
    return n, n_ch


def _fs(fs_hz) -> float:
    return positive_scalar("fs_hz", fs_hz)


# ---------------------------------------------------------------------------------------------
# NumPy .npy (memory-mapped)


def open_npy_record(path, *, fs_hz: float, unit: str, calibration=1.0,
                    channel_names: Sequence[str] | None = None) -> RecordSource:
    """Open a ``.npy`` record, memory-mapped; 2-D arrays are samples x channels.

    Parameters
    ----------
    path : str or Path
        ``.npy`` file (no pickles).
    fs_hz : float
        Sample rate [Hz].
    unit : str
        Declared unit of the values.
    calibration : float or sequence of float
        Factor per channel applied before unit conversion [unit per file value].
    channel_names : sequence of str, optional
        Names (default ``ch0``, ``ch1``, ...).

    Returns
    -------
    RecordSource

    References
    ----------
    NumPy .npy format (numpy.lib.format), numpy.load(mmap_mode="r").
    """
    p = _path(path)
    try:
        arr = np.load(p, mmap_mode="r", allow_pickle=False)
    except (ValueError, OSError) as exc:
        raise InputError("path", p.name, f"is not a readable .npy array ({exc})") from exc
    n, n_ch = _array_shape("values", arr.shape, arr.dtype)
    names = _names(channel_names, n_ch, [f"ch{i}" for i in range(n_ch)])
    return RecordSource(
        fs_hz=_fs(fs_hz), t0_s=0.0, n_samples=n, channel_names=names, unit=unit,
        factors_to_g=_factors(unit, calibration, n_ch), source=p.name,
        _blocks=_slicer(lambda i0, i1: arr[i0:i1], n),
        metadata=MappingProxyType({"format": "npy", "dtype": str(arr.dtype),
                                   "memory_mapped": True}))


# ---------------------------------------------------------------------------------------------
# WAV


def open_wav_record(path, *, calibration, unit: str,
                    channel_names: Sequence[str] | None = None) -> RecordSource:
    """Open a WAV record, all channels, memory-mapped where scipy can.

    Parameters
    ----------
    path : str or Path
        WAV file (PCM 8/16/24/32-bit integer or 32/64-bit float).
    calibration : float or sequence of float
        Engineering value per file count, per channel [unit per count] (e.g. 1 V full
        scale, 10 mV/g on 16 bits: ``100 / 32768`` g per count).
    unit : str
        Declared unit of ``count x calibration``.
    channel_names : sequence of str, optional
        Names (default ``ch0``, ...).

    Returns
    -------
    RecordSource

    References
    ----------
    Microsoft RIFF WAVE format, read by scipy.io.wavfile (mmap=True).
    """
    from scipy.io import wavfile

    p = _path(path)
    mapped = True
    try:
        fs, data = wavfile.read(p, mmap=True)
    except ValueError:
        try:  # 24-bit and some extensible files cannot be mapped
            fs, data = wavfile.read(p)
            mapped = False
        except (ValueError, OSError) as exc:
            raise InputError("path", p.name, f"is not a readable WAV file ({exc})") from exc
    except OSError as exc:
        raise InputError("path", p.name, f"is not a readable WAV file ({exc})") from exc
    n, n_ch = _array_shape("values", data.shape, data.dtype)
    offset = 128.0 if data.dtype == np.uint8 else 0.0  # 8-bit WAV is unsigned

    def read(i0, i1):
        return np.asarray(data[i0:i1], dtype=float) - offset

    return RecordSource(
        fs_hz=float(fs), t0_s=0.0, n_samples=n,
        channel_names=_names(channel_names, n_ch, [f"ch{i}" for i in range(n_ch)]),
        unit=unit, factors_to_g=_factors(unit, calibration, n_ch), source=p.name,
        _blocks=_slicer(read, n),
        metadata=MappingProxyType({"format": "wav", "dtype": str(data.dtype),
                                   "channels": n_ch, "memory_mapped": mapped}))


# ---------------------------------------------------------------------------------------------
# HDF5 and MATLAB v7.3


def _h5_dataset(f, name: str, what: str):
    import h5py

    if name not in f:
        found: list[str] = []
        f.visititems(lambda k, o: found.append(k) if isinstance(o, h5py.Dataset) else None)
        raise InputError(what, name, f"is not a dataset of the file (datasets: {found[:20]})")
    d = f[name]
    if not isinstance(d, h5py.Dataset):
        raise InputError(what, name, "is a group, not a dataset")
    return d


def open_hdf5_record(path, *, dataset: str, unit: str, fs_hz: float | None = None,
                     fs_attribute: str | None = None, calibration=1.0,
                     channel_names: Sequence[str] | None = None,
                     transpose: bool = False) -> RecordSource:
    """Open a dataset of an HDF5 file as a record, sliced through h5py.

    Parameters
    ----------
    path : str or Path
        HDF5 file.
    dataset : str
        Path of the dataset in the file (``"/flight/accel"``); 1-D, or 2-D samples x
        channels (``transpose=True`` for channels x samples).
    unit : str
        Declared unit of the values.
    fs_hz : float, optional
        Sample rate [Hz]; or `fs_attribute`.
    fs_attribute : str, optional
        Name of an attribute of the dataset holding the sample rate [Hz].
    calibration : float or sequence of float
        Factor per channel before unit conversion.
    channel_names : sequence of str, optional
        Names (default ``ch0``, ...).
    transpose : bool
        The dataset is stored channels x samples.

    Returns
    -------
    RecordSource
        The file stays open while the source is alive (h5py closes it when the
        source is garbage-collected).

    References
    ----------
    The HDF Group, HDF5 file format; h5py (Collette, Python and HDF5, O'Reilly 2013).
    """
    import h5py

    p = _path(path)
    if not h5py.is_hdf5(p):
        raise InputError("path", p.name, "is not an HDF5 file")
    f = h5py.File(p, "r")
    d = _h5_dataset(f, dataset, "dataset")
    shape = d.shape[::-1] if (transpose and d.ndim == 2) else d.shape
    n, n_ch = _array_shape("dataset", shape, d.dtype)
    if (fs_hz is None) == (fs_attribute is None):
        raise InputError("fs_hz", fs_hz, "give exactly one of fs_hz or fs_attribute")
    if fs_attribute is not None:
        if fs_attribute not in d.attrs:
            raise InputError("fs_attribute", fs_attribute,
                             f"is not an attribute of {dataset} ({sorted(d.attrs)})")
        fs = _fs(np.asarray(d.attrs[fs_attribute]).reshape(-1)[0])
    else:
        fs = _fs(fs_hz)
    if transpose and d.ndim == 2:
        def read(i0, i1):
            return d[:, i0:i1].T
    else:
        def read(i0, i1):
            return d[i0:i1]
    return RecordSource(
        fs_hz=fs, t0_s=0.0, n_samples=n,
        channel_names=_names(channel_names, n_ch, [f"ch{i}" for i in range(n_ch)]),
        unit=unit, factors_to_g=_factors(unit, calibration, n_ch),
        source=f"{p.name}:{dataset}", _blocks=_slicer(read, n),
        metadata=MappingProxyType({"format": "hdf5", "dataset": dataset,
                                   "dtype": str(d.dtype), "_file": f}))


def open_mat_record(path, *, variable: str, unit: str, fs_hz: float, calibration=1.0,
                    channel_names: Sequence[str] | None = None) -> RecordSource:
    """Open a variable of a MATLAB ``.mat`` file as a record (v4-v7.2 or v7.3).

    Parameters
    ----------
    path : str or Path
        ``.mat`` file.
    variable : str
        Name of the array: a vector, or a matrix with one column per channel (as
        MATLAB shows it).
    unit : str
        Declared unit of the values.
    fs_hz : float
        Sample rate [Hz].
    calibration : float or sequence of float
        Factor per channel before unit conversion.
    channel_names : sequence of str, optional
        Names (default ``ch0``, ...).

    Returns
    -------
    RecordSource
        v7.3: sliced from the file through h5py (MATLAB writes column-major, so an
        n x c MATLAB matrix is stored c x n). v4-v7.2: the variable is loaded whole by
        scipy.io.loadmat (those files cannot be sliced).

    References
    ----------
    MathWorks, MAT-file format (v5, 2019) and v7.3 (HDF5-based); scipy.io.loadmat; h5py.
    """
    import h5py

    p = _path(path)
    if h5py.is_hdf5(p):
        with h5py.File(p, "r") as f:
            d = _h5_dataset(f, variable, "variable")
            shape = d.shape
        # MATLAB n x c is stored c x n; a MATLAB row vector 1 x n is stored n x 1
        transpose = len(shape) == 2 and shape[1] != 1
        src = open_hdf5_record(p, dataset=variable, unit=unit, fs_hz=fs_hz,
                               calibration=calibration, channel_names=channel_names,
                               transpose=transpose)
        meta = dict(src.metadata)
        meta.update({"format": "mat-v7.3", "variable": variable})
        return RecordSource(
            fs_hz=src.fs_hz, t0_s=0.0, n_samples=src.n_samples,
            channel_names=src.channel_names, unit=unit, factors_to_g=src.factors_to_g,
            source=f"{p.name}:{variable}", _blocks=src._blocks, metadata=MappingProxyType(meta))
    from scipy.io import loadmat

    try:
        mat = loadmat(p, variable_names=[variable])
    except (ValueError, OSError, TypeError, NotImplementedError) as exc:
        raise InputError("path", p.name, f"is not a readable .mat file ({exc})") from exc
    if variable not in mat:
        raise InputError("variable", variable, "is not in the file")
    a = np.asarray(mat[variable])
    if a.ndim == 2 and 1 in a.shape:
        a = a.reshape(-1)
    n, n_ch = _array_shape("variable", a.shape, a.dtype)
    return RecordSource(
        fs_hz=_fs(fs_hz), t0_s=0.0, n_samples=n,
        channel_names=_names(channel_names, n_ch, [f"ch{i}" for i in range(n_ch)]),
        unit=unit, factors_to_g=_factors(unit, calibration, n_ch),
        source=f"{p.name}:{variable}", _blocks=_slicer(lambda i0, i1: a[i0:i1], n),
        metadata=MappingProxyType({"format": "mat-v5", "variable": variable,
                                   "dtype": str(a.dtype), "memory_mapped": False}))


# ---------------------------------------------------------------------------------------------
# UFF dataset 58, several records


def open_uff58_record(path, *, unit: str, records: Sequence[int] | None = None,
                      calibration=1.0, channel_names: Sequence[str] | None = None,
                      time_tolerance: float = _TIME_TOLERANCE) -> RecordSource:
    """Open several dataset-58 time records of a universal file as one multi-channel record.

    Parameters
    ----------
    path : str or Path
        Universal file (ASCII or binary dataset 58).
    unit : str
        Declared unit of the ordinates (all records); a record whose unit label names
        another known acceleration unit is refused.
    records : sequence of int, optional
        Indices among the file's time records (function type 1), 0-based; default all.
    calibration : float or sequence of float
        Factor per channel before unit conversion.
    channel_names : sequence of str, optional
        Default: ``node<rsp_node>:<rsp_dir>`` of each record.
    time_tolerance : float
        For uneven abscissae: largest step deviation [fraction of a step].

    Returns
    -------
    RecordSource
        The records must share sample rate, start time and length.

    References
    ----------
    Universal file format, dataset 58 (I-DEAS/SDRC), as implemented by pyuff.
    """
    import pyuff

    p = _path(path)
    try:
        sets = pyuff.UFF(str(p)).read_sets()
    except Exception as exc:  # pyuff raises bare Exceptions on malformed files
        raise InputError("path", p.name, f"is not a readable universal file ({exc})") from exc
    sets = sets if isinstance(sets, list) else [sets]
    times = [s for s in sets if s.get("type") == 58 and int(s.get("func_type", -1)) == 1]
    if not times:
        raise InputError("path", p.name, "holds no dataset 58 time record (function type 1)")
    idx = list(range(len(times))) if records is None else list(records)
    if not idx:
        raise InputError("records", idx, "must name at least one record")
    for r in idx:
        if not isinstance(r, int) or not 0 <= r < len(times):
            raise InputError("records", r, f"must be 0..{len(times) - 1}")
    accel_factor(unit)
    cols, default_names, rates = [], [], []
    for r in idx:
        s = times[r]
        label = str(s.get("ordinate_axis_units_lab", "")).strip()
        file_unit = recognised_accel(label)
        if file_unit is not None and file_unit != _norm(unit):
            raise InputError("unit", unit,
                             f"differs from record {r}'s ordinate label {label!r}")
        data = np.asarray(s.get("data"))
        if np.iscomplexobj(data):
            raise InputError(f"records[{r}]", "complex ordinate", "must be real")
        y = data.astype(float)
        x = np.asarray(s.get("x"), dtype=float)
        if int(s.get("abscissa_spacing", 0)) == 1 and float(s.get("abscissa_inc", 0)) > 0:
            fs, t0 = 1.0 / float(s["abscissa_inc"]), float(s.get("abscissa_min", 0.0))
        else:
            dt = np.diff(x)
            ref = float(np.median(dt)) if dt.size else 0.0
            if ref <= 0 or (np.abs(dt - ref) > time_tolerance * ref).any():
                raise InputError(f"records[{r}].x", "uneven abscissa",
                                 "must be uniformly sampled")
            fs, t0 = 1.0 / ((x[-1] - x[0]) / (x.size - 1)), float(x[0])
        cols.append(y)
        rates.append((fs, t0, y.size))
        default_names.append(f"node{s.get('rsp_node')}:{s.get('rsp_dir')}")
    fs0, t00, n0 = rates[0]
    for r, (fs, t0, n) in zip(idx, rates, strict=True):
        if n != n0 or abs(fs - fs0) > 1e-9 * fs0 or abs(t0 - t00) > 0.5 / fs0:
            raise InputError(f"records[{r}]", f"{n} samples at {fs:g} Hz from {t0:g} s",
                             f"must match record {idx[0]} ({n0} samples at {fs0:g} Hz from "
                             f"{t00:g} s)")
    if len(set(default_names)) != len(default_names):
        default_names = [f"record{r}" for r in idx]
    arr = np.column_stack(cols)
    n, n_ch = _array_shape("data", arr.shape, arr.dtype)
    return RecordSource(
        fs_hz=fs0, t0_s=t00, n_samples=n,
        channel_names=_names(channel_names, n_ch, default_names), unit=unit,
        factors_to_g=_factors(unit, calibration, n_ch), source=p.name,
        _blocks=_slicer(lambda i0, i1: arr[i0:i1], n),
        metadata=MappingProxyType({"format": "uff58", "records": idx,
                                   "memory_mapped": False}))


# ---------------------------------------------------------------------------------------------
# CSV


def _sniff(first_lines: list[str]) -> str:
    try:
        return csv.Sniffer().sniff("\n".join(first_lines), delimiters=",;\t ").delimiter
    except csv.Error:
        return ","


def open_csv_record(path, *, unit: str, fs_hz: float | None = None, time_column=0,
                    value_columns: Sequence | None = None, calibration=1.0,
                    delimiter: str | None = None,
                    time_tolerance: float = _TIME_TOLERANCE) -> RecordSource:
    """Open a CSV record: an optional time column and one column per channel.

    Parameters
    ----------
    path : str or Path
        Text file; lines starting with ``#`` are comments; an optional header row.
    unit : str
        Declared unit of the values.
    fs_hz : float, optional
        Sample rate [Hz], when there is no time column (then ``time_column=None``).
    time_column : int or str or None
        Time column [s] (index or header name), checked uniform; None with `fs_hz`.
    value_columns : sequence of int or str, optional
        Channel columns (default: every column but the time column).
    calibration : float or sequence of float
        Factor per channel before unit conversion.
    delimiter : str, optional
        Field separator (default: sniffed from the first lines).
    time_tolerance : float
        Largest deviation of a time step from the first step [fraction of a step].

    Returns
    -------
    RecordSource
        A first pass counts the rows and checks the time column chunk by chunk;
        :meth:`RecordSource.chunks` reads the file again, a chunk at a time.

    References
    ----------
    RFC 4180 (CSV); numpy.loadtxt.
    """
    p = _path(path)
    head: list[str] = []
    with p.open(encoding="utf-8-sig") as fh:
        for line in fh:
            if line.strip() and not line.lstrip().startswith("#"):
                head.append(line.rstrip("\n"))
            if len(head) >= 6:
                break
    if not head:
        raise InputError("path", str(p), "has no data rows")
    delim = delimiter or _sniff(head)
    split = (lambda s: s.split()) if delim == " " else (lambda s: [c.strip() for c in
                                                                    s.split(delim)])
    first = split(head[0])
    try:
        [float(c) for c in first]
        header = None
    except ValueError:
        header = first
    ncol = len(first)

    def col_index(c, what):
        if isinstance(c, str):
            if header is None or c not in header:
                raise InputError(what, c, f"is not a column name (header: {header})")
            return header.index(c)
        j = int(c)
        if not -ncol <= j < ncol:
            raise InputError(what, c, f"is out of range ({ncol} columns)")
        return j % ncol

    if (fs_hz is None) == (time_column is None):
        raise InputError("fs_hz", fs_hz, "give exactly one of fs_hz or time_column")
    tj = None if time_column is None else col_index(time_column, "time_column")
    if value_columns is None:
        vj = [j for j in range(ncol) if j != tj]
    else:
        vj = [col_index(c, "value_columns") for c in value_columns]
    if not vj:
        raise InputError("value_columns", value_columns, "selects no column")
    names = tuple(header[j] if header is not None else f"column {j}" for j in vj)
    use = ([tj] if tj is not None else []) + vj
    skip = 1 if header is not None else 0

    def blocks(rows: int):
        with p.open(encoding="utf-8-sig") as fh:
            for _ in range(skip):
                for line in fh:
                    if line.strip() and not line.lstrip().startswith("#"):
                        break
            row0 = 0
            while True:
                try:
                    with warnings.catch_warnings():
                        # the block after the last row is empty: that is the end, not a fault
                        warnings.filterwarnings("ignore", "loadtxt: input contained no data")
                        a = np.loadtxt(fh, delimiter=None if delim == " " else delim,
                                       comments="#", usecols=use, max_rows=rows, ndmin=2)
                except ValueError as exc:
                    raise InputError("path", f"{p.name} near data row {row0}",
                                     f"has a cell that is not a number ({exc})") from exc
                if a.shape[0] == 0:
                    return
                yield row0, a
                row0 += a.shape[0]
                if a.shape[0] < rows:
                    return

    # first pass: count rows, check the time column
    n = 0
    t_first = t_last = dt0 = None
    prev = None
    for row0, a in blocks(DEFAULT_CHUNK_SAMPLES):
        n += a.shape[0]
        if tj is None:
            continue
        t = a[:, 0]
        if prev is not None:
            t = np.concatenate(([prev], t))
        if t_first is None:
            t_first = float(t[0])
        if t.size >= 2:
            d = np.diff(t)
            if dt0 is None:
                dt0 = float(d[0])
                if not dt0 > 0:
                    raise InputError(f"{header[tj] if header else 'time'}[1]", float(t[1]),
                                     "must be strictly increasing")
            bad = np.abs(d - dt0) > time_tolerance * dt0
            if bad.any():
                i = int(np.argmax(bad))
                k = row0 + i + (0 if prev is not None else 1)
                raise InputError(f"{header[tj] if header else 'time'}[{k}]", float(t[i + 1]),
                                 f"step {d[i]:.6g} s vs {dt0:.6g} s: uniform sampling "
                                 f"required (tolerance {time_tolerance:.3g} of a step)")
        prev = float(t[-1])
        t_last = prev
    if n < 2:
        raise InputError("path", p.name, f"has {n} data rows (needs at least 2)")
    if tj is None:
        fs, t0 = _fs(fs_hz), 0.0
    else:
        fs, t0 = (n - 1) / (t_last - t_first), t_first
    off = 0 if tj is None else 1

    def values(rows: int):
        for _row0, a in blocks(rows):
            yield a[:, off:]

    return RecordSource(
        fs_hz=fs, t0_s=t0, n_samples=n, channel_names=names, unit=unit,
        factors_to_g=_factors(unit, calibration, len(vj)), source=p.name, _blocks=values,
        metadata=MappingProxyType({"format": "csv", "delimiter": delim,
                                   "columns": list(names), "memory_mapped": False}))


# ---------------------------------------------------------------------------------------------
# by file name


_OPENERS = {".csv": open_csv_record, ".txt": open_csv_record, ".npy": open_npy_record,
            ".wav": open_wav_record, ".mat": open_mat_record, ".h5": open_hdf5_record,
            ".hdf5": open_hdf5_record, ".uff": open_uff58_record,
            ".unv": open_uff58_record}


def open_record(path, **options) -> RecordSource:
    """Open a record by its file extension (.csv/.txt, .npy, .wav, .mat, .h5/.hdf5, .uff/.unv).

    Parameters
    ----------
    path : str or Path
        The file.
    **options
        The options of the format's ``open_*`` function (unit, fs_hz, ...).

    Returns
    -------
    RecordSource
    """
    ext = Path(os.fspath(path)).suffix.lower()
    if ext not in _OPENERS:
        raise InputError("path", str(path), f"has an unknown extension (known: "
                         f"{', '.join(sorted(_OPENERS))})")
    try:
        return _OPENERS[ext](path, **options)
    except TypeError as exc:
        raise InputError("options", sorted(options), f"do not fit a {ext} file ({exc})") from exc
