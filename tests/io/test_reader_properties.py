"""Property tests of the file readers: any byte string gives an InputError or a valid
object (finite samples, a positive sample rate, increasing frequencies), never another
exception. Hypothesis draws raw bytes and bytes that start like each format."""

from __future__ import annotations

import io
import struct
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from qualplan import io as qio
from qualplan.dynamics.errors import InputError

SETTINGS = settings(max_examples=60, deadline=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture])


def _npy_head() -> bytes:
    buf = io.BytesIO()
    np.save(buf, np.arange(8.0))
    return buf.getvalue()


def _wav_head() -> bytes:
    data = struct.pack("<8h", *range(8))
    fmt = struct.pack("<HHIIHH", 1, 1, 1000, 2000, 2, 16)
    return (b"RIFF" + struct.pack("<I", 36 + len(data)) + b"WAVE" + b"fmt " +
            struct.pack("<I", 16) + fmt + b"data" + struct.pack("<I", len(data)) + data)


PREFIXES = {
    ".csv": [b"", b"time,accel\n", b"0,1\n0.001,2\n", b"freq_hz,asd_g2_hz\n20,0.01\n"],
    ".npy": [b"", _npy_head()[:20], _npy_head()[:-8], b"PK\x03\x04"],
    ".wav": [b"", _wav_head()[:24], _wav_head()[:44], _wav_head()[:-4]],
    ".mat": [b"", b"MATLAB 5.0 MAT-file", b"\x00" * 128],
    ".uff": [b"", b"    -1\n    58\n", b"    -1\n    58\n" + b"NONE\n" * 10],
}


def _read(suffix: str, content: bytes):
    with tempfile.TemporaryDirectory() as tmp:
        p = Path(tmp) / f"f{suffix}"
        p.write_bytes(content)
        if suffix == ".csv":
            return [qio.read_csv_time_history(p, unit="g"),
                    qio.read_csv_time_history(p, unit="g", time_column=None, value_column=0,
                                              fs_hz=1000.0),
                    qio.read_csv_spectrum(p, unit="g^2/Hz")]
        if suffix == ".npy":
            return [qio.read_npy_time_history(p, fs_hz=1000.0, unit="g")]
        if suffix == ".wav":
            return [qio.read_wav_time_history(p, calibration=1e-3, unit="g")]
        if suffix == ".mat":
            return [qio.read_mat_time_history(p, variable="x", unit="g", fs_hz=100.0)]
        return [qio.read_uff58(p, unit="g")]


def _valid(obj) -> None:
    if isinstance(obj, qio.TimeHistory):
        assert obj.accel_g.ndim == 1 and obj.accel_g.size >= 2
        assert np.isfinite(obj.accel_g).all()
        assert np.isfinite(obj.fs_hz) and obj.fs_hz > 0
    else:
        assert isinstance(obj, qio.Spectrum)
        assert (np.diff(obj.freq_hz) > 0).all() and (obj.freq_hz > 0).all()
        assert np.isfinite(obj.asd_g2_hz).all() and (obj.asd_g2_hz >= 0).all()


def _each(suffix: str, content: bytes) -> None:
    try:
        results = _read(suffix, content)
    except InputError as exc:
        assert exc.field and exc.rule  # a clear error names the field and the rule
        return
    for obj in results:
        _valid(obj)


@pytest.mark.parametrize("suffix", sorted(PREFIXES))
@SETTINGS
@given(data=st.data())
def test_any_bytes_give_an_input_error_or_a_valid_record(suffix, data):
    prefix = data.draw(st.sampled_from(PREFIXES[suffix]))
    tail = data.draw(st.binary(max_size=300))
    _each(suffix, prefix + tail)


_CELL = st.one_of(
    st.sampled_from(["0", "1", "-1", "2_000", "nan", "inf", "-inf", "1e999", "", " ", "0x10",
                     "1,5", "é", "\t", "=1+1", "1e-3", ".5", "5.", "time", "accel"]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.text(max_size=6),
)


@SETTINGS
@given(rows=st.lists(st.lists(_CELL, min_size=1, max_size=4), min_size=1, max_size=8),
       sep=st.sampled_from([",", ";", "\t", " "]),
       encoding=st.sampled_from(["utf-8", "latin-1", "utf-16"]))
def test_any_table_gives_an_input_error_or_a_valid_record(rows, sep, encoding):
    text = "\n".join(sep.join(r) for r in rows)
    try:
        content = text.encode(encoding)
    except UnicodeEncodeError:
        content = text.encode("utf-8", "surrogatepass")
    _each(".csv", content)
