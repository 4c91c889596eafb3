"""Tests of qualplan.io readers: round trips through each format, malformed files rejected."""

import numpy as np
import pytest
import pyuff
from scipy.io import savemat, wavfile

from qualplan.dynamics.errors import InputError
from qualplan.io import (
    read_csv_spectrum,
    read_csv_time_history,
    read_mat_time_history,
    read_npy_time_history,
    read_uff58,
    read_wav_time_history,
)

G0 = 9.80665  # standard gravity [m/s^2] (CGPM 1901)


def _record(n=2000, fs=1000.0, seed=0):
    t = np.arange(n) / fs
    x = np.random.default_rng(seed).standard_normal(n)
    return t, x


def test_csv_time_and_value_columns(tmp_path):
    # closed form: m/s^2 -> g divides by 9.80665; fs from the time column
    t, x = _record()
    p = tmp_path / "rec.csv"
    p.write_text("time_s,accel\n" + "\n".join(f"{a:.6f},{b:.9e}" for a, b in zip(t, x * G0,
                                                                                 strict=True)))
    th = read_csv_time_history(p, unit="m/s^2", value_column="accel", time_column="time_s")
    assert th.fs_hz == pytest.approx(1000.0, rel=1e-9)
    np.testing.assert_allclose(th.accel_g, x, rtol=1e-8)
    assert th.unit == "m/s^2" and th.metadata["time_column"] == "time_s"
    assert th.duration_s == pytest.approx(2.0)


def test_csv_one_column_needs_fs(tmp_path):
    # common practice: values only + declared sample rate; calibration applied
    _, x = _record(500)
    p = tmp_path / "v.csv"
    p.write_text("# comment line\n" + "\n".join(f"{v:.9e}" for v in x))
    th = read_csv_time_history(p, unit="g", value_column=0, time_column=None, fs_hz=500.0,
                               calibration=2.0)
    np.testing.assert_allclose(th.accel_g, 2 * x, rtol=1e-8)
    with pytest.raises(InputError, match="fs_hz.*required"):
        read_csv_time_history(p, unit="g", value_column=0, time_column=None)


@pytest.mark.parametrize(
    ("body", "kwargs", "match"),
    [
        ("t,a\n0,1\n0.001,2\n0.003,1\n0.004,1\n", {}, r"t\[2\].*gap"),
        ("t,a\n0,1\n0.001,2\n0.0015,1\n0.003,1\n", {}, "irregular"),
        ("t,a\n0,1\n0.001,2\n0.001,1\n", {}, "strictly increasing"),
        ("t,a\n0,1\n0.001,nan\n0.002,1\n", {}, r"a\[row 3\].*finite"),
        ("t,a\n0,1\n0.001,abc\n", {}, r"a\[row 3\].*number"),
        ("t,a\n", {}, "no data rows"),
        ("t,a\n0,1\n0.001,1\n", {"unit": "furlong"}, "unit"),
        ("t,a\n0,1\n0.001,1\n", {"value_column": "b"}, "not a column"),
    ],
)
def test_csv_bad_files(tmp_path, body, kwargs, match):
    # common practice: malformed files -> InputError naming the column/row and the value
    p = tmp_path / "bad.csv"
    p.write_text(body)
    args = {"unit": "g", "value_column": "a", "time_column": "t"} | kwargs
    with pytest.raises(InputError, match=match):
        read_csv_time_history(p, **args)


def test_empty_and_missing_file(tmp_path):
    # common practice: clear errors
    p = tmp_path / "empty.csv"
    p.write_text("")
    with pytest.raises(InputError, match="empty"):
        read_csv_time_history(p, unit="g")
    with pytest.raises(InputError, match="not an existing file"):
        read_csv_time_history(tmp_path / "nope.csv", unit="g")


def test_csv_spectrum(tmp_path):
    # closed form: (m/s^2)^2/Hz -> g^2/Hz divides by 9.80665^2; semicolon delimiter sniffed
    f = np.array([20.0, 50.0, 800.0, 2000.0])
    a = np.array([0.026, 0.16, 0.16, 0.026])
    p = tmp_path / "s.csv"
    p.write_text("freq;asd\n" + "\n".join(f"{x};{y * G0 ** 2}" for x, y in zip(f, a,
                                                                              strict=True)))
    s = read_csv_spectrum(p, unit="(m/s^2)^2/Hz", freq_column="freq", value_column="asd")
    np.testing.assert_allclose(s.freq_hz, f)
    np.testing.assert_allclose(s.asd_g2_hz, a, rtol=1e-12)
    p.write_text("freq;asd\n20;0.1\n10;0.1\n")
    with pytest.raises(InputError, match=r"freq\[1\].*strictly increasing"):
        read_csv_spectrum(p, unit="g^2/Hz", freq_column="freq", value_column="asd")
    with pytest.raises(InputError, match="unit"):
        read_csv_spectrum(p, unit="dB", freq_column="freq", value_column="asd")


def test_npy(tmp_path):
    # closed form: in/s^2 -> g is 0.0254/9.80665
    _, x = _record()
    p = tmp_path / "r.npy"
    np.save(p, x)
    th = read_npy_time_history(p, fs_hz=1000.0, unit="in/s^2")
    np.testing.assert_allclose(th.accel_g, x * 0.0254 / G0, rtol=1e-14)
    np.save(p, np.array([1.0, np.nan, 2.0]))
    with pytest.raises(InputError, match=r"values\[1\].*finite"):
        read_npy_time_history(p, fs_hz=1000.0, unit="g")
    np.save(p, np.ones((3, 2)))
    with pytest.raises(InputError, match="1-D"):
        read_npy_time_history(p, fs_hz=1000.0, unit="g")
    np.save(p, x)
    with pytest.raises(InputError, match="fs_hz"):
        read_npy_time_history(p, fs_hz=-1.0, unit="g")


def test_wav_calibration(tmp_path):
    # closed form: counts x calibration; 16-bit stereo, channel 1
    counts = (np.random.default_rng(1).standard_normal((1000, 2)) * 3000).astype(np.int16)
    p = tmp_path / "r.wav"
    wavfile.write(p, 4096, counts)
    cal = 100.0 / 32768.0  # g per count: 1 V full scale, 10 mV/g sensor
    th = read_wav_time_history(p, calibration=cal, unit="g", channel=1)
    assert th.fs_hz == 4096.0
    np.testing.assert_allclose(th.accel_g, counts[:, 1] * cal, rtol=1e-14)
    assert th.metadata["channels"] == 2 and th.metadata["dtype"] == "int16"
    with pytest.raises(InputError, match="channel"):
        read_wav_time_history(p, calibration=cal, unit="g", channel=2)
    with pytest.raises(InputError, match="calibration"):
        read_wav_time_history(p, calibration=0.0, unit="g")
    bad = tmp_path / "bad.wav"
    bad.write_bytes(b"not a wav file at all")
    with pytest.raises(InputError, match="WAV"):
        read_wav_time_history(bad, calibration=1.0, unit="g")


def test_mat(tmp_path):
    # closed form: fs from the time vector; unit mm/s^2 -> g
    t, x = _record()
    p = tmp_path / "r.mat"
    savemat(p, {"acc": x * 1000 * G0, "t": t})
    th = read_mat_time_history(p, variable="acc", unit="mm/s^2", time_variable="t")
    assert th.fs_hz == pytest.approx(1000.0, rel=1e-9)
    np.testing.assert_allclose(th.accel_g, x, rtol=1e-12)
    with pytest.raises(InputError, match="not in the file"):
        read_mat_time_history(p, variable="nope", unit="g", fs_hz=1.0)
    with pytest.raises(InputError, match="exactly one"):
        read_mat_time_history(p, variable="acc", unit="g")
    t2 = t.copy()
    t2[500:] += 0.01
    savemat(p, {"acc": x, "t": t2})
    with pytest.raises(InputError, match=r"t\[500\].*gap"):
        read_mat_time_history(p, variable="acc", unit="g", time_variable="t")


def _uff(path, func_type, x, data, label):
    ds = pyuff.prepare_58(
        binary=0, func_type=func_type, rsp_node=7, rsp_dir=3, ref_node=7, ref_dir=3, data=data,
        x=x, id1="test record", rsp_ent_name="ch1", ref_ent_name="ch1", abscissa_spacing=1,
        abscissa_spec_data_type=17 if func_type == 1 else 18, ordinate_spec_data_type=12,
        orddenom_spec_data_type=13, ordinate_axis_units_lab=label,
        abscissa_axis_units_lab="s" if func_type == 1 else "Hz",
    )
    pyuff.UFF(str(path)).write_sets(ds, mode="overwrite")


def test_uff58_time_and_psd(tmp_path):
    # reference library pyuff (writes the dataset 58 file we read back)
    t, x = _record(1024, 2048.0)
    p = tmp_path / "r.uff"
    _uff(p, 1, t, x * G0, "m/s^2")
    th = read_uff58(p, unit="m/s^2")
    assert th.fs_hz == pytest.approx(2048.0, rel=1e-6)  # ASCII UFF prints ~6 digits of the step
    np.testing.assert_allclose(th.accel_g, x, rtol=1e-6)  # ASCII UFF keeps ~7 digits
    assert th.metadata["rsp_node"] == 7
    with pytest.raises(InputError, match="differs from the file's ordinate label"):
        read_uff58(p, unit="g")
    f = np.linspace(0.0, 2000.0, 401)
    _uff(p, 9, f, np.full(f.size, 0.04), "g^2/Hz")
    s = read_uff58(p, unit="g^2/Hz")
    assert s.freq_hz[0] == 5.0 and s.metadata["dropped_dc_line"]
    np.testing.assert_allclose(s.asd_g2_hz, 0.04, rtol=1e-6)
    with pytest.raises(InputError, match="record"):
        read_uff58(p, unit="g^2/Hz", record=3)
    bad = tmp_path / "bad.uff"
    bad.write_text("    -1\n    58\ngarbage\n")
    with pytest.raises(InputError):
        read_uff58(bad, unit="g")


# --- bytes and streams: the readers take a file's content as well as its path ---------


def test_every_reader_takes_bytes_and_a_stream_as_well_as_a_path(tmp_path):
    """The same file read from its path, its bytes and a binary stream gives the same
    record (planning hands uploads over as bytes, never through a temporary file)."""
    import io as _io_mod

    x = np.sin(2 * np.pi * 50.0 * np.arange(400) / 1000.0)
    cases = []
    p = tmp_path / "rec.csv"
    p.write_text("time_s,accel_g\n" + "".join(f"{i / 1000.0:.6f},{v:.9f}\n"
                                                for i, v in enumerate(x)))
    cases.append((p, lambda src, **kw: read_csv_time_history(src, unit="g", **kw)))
    p = tmp_path / "rec.npy"
    np.save(p, x)
    cases.append((p, lambda src, **kw: read_npy_time_history(src, fs_hz=1000.0, unit="g",
                                                                **kw)))
    p = tmp_path / "rec.wav"
    wavfile.write(p, 1000, (x * 16000).astype(np.int16))
    cases.append((p, lambda src, **kw: read_wav_time_history(src, calibration=1 / 16000,
                                                                unit="g", **kw)))
    p = tmp_path / "rec.mat"
    savemat(p, {"acc": x, "fs": 1000.0})
    cases.append((p, lambda src, **kw: read_mat_time_history(src, variable="acc",
                                                                unit="g", fs_hz=1000.0, **kw)))
    for path, read in cases:
        from_path = read(path)
        from_bytes = read(path.read_bytes(), name=path.name)
        from_stream = read(_io_mod.BytesIO(path.read_bytes()), name=path.name)
        for other in (from_bytes, from_stream):
            assert np.array_equal(other.accel_g, from_path.accel_g), path.suffix
            assert other.fs_hz == from_path.fs_hz and other.source == from_path.source


def test_empty_bytes_and_non_utf8_text_are_named_errors():
    with pytest.raises(InputError, match="upload.csv"):
        read_csv_time_history(b"", name="upload.csv", unit="g")
    with pytest.raises(InputError, match="not UTF-8"):
        read_csv_time_history(b"\xff\xfe0,1\n", name="latin.csv", unit="g")
