"""Streaming readers (qualplan.io.streams): each format read in chunks equals its data.

Records are invented (seeded noise); chunk sizes never divide the record length.
"""

import warnings

import h5py
import numpy as np
import pytest
import pyuff
from scipy.io import savemat, wavfile

from qualplan.dynamics.errors import InputError
from qualplan.io import read_csv_time_history, read_npy_time_history, read_wav_time_history, streams

G0 = 9.80665  # standard gravity [m/s^2] (CGPM 1901)
FS = 1000.0


def data(n=5003, n_ch=3, seed=0):
    return np.random.default_rng(seed).standard_normal((n, n_ch))


def gather(src, size=997):
    parts = list(src.chunks(size))
    assert all(p.shape[0] <= size and p.shape[1] == src.n_channels for p in parts)
    assert all(p.shape[0] == size for p in parts[:-1])
    return np.concatenate(parts)


def test_npy_memory_mapped_multi_channel(tmp_path):
    x = data()
    p = tmp_path / "r.npy"
    np.save(p, x.astype(np.float32))
    src = streams.open_npy_record(p, fs_hz=FS, unit="m/s^2", calibration=[1.0, 2.0, 0.5],
                                  channel_names=["X", "Y", "Z"])
    assert (src.n_samples, src.n_channels, src.channel_names) == (5003, 3, ("X", "Y", "Z"))
    assert src.metadata["memory_mapped"] is True
    # closed form: m/s^2 -> g divides by 9.80665, calibration per channel
    expect = x.astype(np.float32).astype(float) * np.array([1.0, 2.0, 0.5]) / G0
    np.testing.assert_allclose(gather(src), expect, rtol=1e-15)
    assert src.duration_s == pytest.approx(5.003)


def test_npy_single_channel_equals_whole_reader(tmp_path):
    x = data(n_ch=1)[:, 0]
    p = tmp_path / "one.npy"
    np.save(p, x)
    src = streams.open_npy_record(p, fs_hz=FS, unit="g", calibration=3.0)
    whole = read_npy_time_history(p, fs_hz=FS, unit="g", calibration=3.0)
    np.testing.assert_array_equal(gather(src, 64)[:, 0], whole.accel_g)


def test_csv_with_time_column_and_header(tmp_path):
    x = data(n=2501)
    t = np.arange(x.shape[0]) / FS
    p = tmp_path / "r.csv"
    rows = "\n".join(f"{a:.6f},{b:.12e},{c:.12e},{d:.12e}" for a, (b, c, d) in zip(t, x,
                                                                                     strict=True))
    p.write_text("# invented record\ntime_s,ax,ay,az\n" + rows + "\n")
    src = streams.open_csv_record(p, unit="g", time_column="time_s")
    assert src.channel_names == ("ax", "ay", "az")
    assert src.fs_hz == pytest.approx(FS, rel=1e-9) and src.n_samples == 2501
    np.testing.assert_allclose(gather(src, 333), x, rtol=1e-11)
    one = streams.open_csv_record(p, unit="g", time_column=0, value_columns=["ay"])
    whole = read_csv_time_history(p, unit="g", value_column="ay", time_column="time_s")
    np.testing.assert_allclose(gather(one, 1000)[:, 0], whole.accel_g, rtol=0)


def test_csv_without_header_exact_multiple_of_block(tmp_path):
    x = data(n=65_536 * 2, n_ch=1)[:, 0]
    p = tmp_path / "r.txt"
    p.write_text("\n".join(f"{v:.17g}" for v in x))
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no "empty input" warning from the last block
        src = streams.open_csv_record(p, unit="g", fs_hz=FS, time_column=None)
        np.testing.assert_array_equal(gather(src, 50_000)[:, 0], x)


@pytest.mark.parametrize("body, kwargs, match", [
    ("t,a\n0,1\n0.001,2\n0.002,x\n", {"time_column": "t"}, "not a number"),
    ("t,a\n0,1\n0.001,2\n0.0035,3\n", {"time_column": "t"}, r"t\[2\]"),
    ("t,a\n0,1\n0.001,2\n", {"time_column": "q"}, "time_column"),
    ("t,a\n0,1\n0.001,2\n", {"time_column": "t", "fs_hz": 10.0}, "exactly one"),
    ("t,a\n0,1\n", {"time_column": "t"}, "at least 2"),
    ("t,a\n0,1\n0.001,nan\n0.002,1\n", {"time_column": "t"}, r"a\[1\]"),
])
def test_csv_bad_files(tmp_path, body, kwargs, match):
    p = tmp_path / "bad.csv"
    p.write_text(body)
    with pytest.raises(InputError, match=match):
        src = streams.open_csv_record(p, unit="g", **kwargs)
        gather(src)


def test_wav_int16_memory_mapped_and_24_bit_fallback(tmp_path):
    x = (data(n_ch=2) * 3000).astype(np.int16)
    p = tmp_path / "r.wav"
    wavfile.write(p, 2000, x)
    src = streams.open_wav_record(p, calibration=[0.01, 0.02], unit="g")
    assert src.fs_hz == 2000.0 and src.metadata["memory_mapped"] is True
    np.testing.assert_allclose(gather(src), x * np.array([0.01, 0.02]), rtol=1e-15)
    whole = read_wav_time_history(p, calibration=0.02, unit="g", channel=1)
    np.testing.assert_array_equal(gather(src)[:, 1], whole.accel_g)


def test_wav_uint8_offset(tmp_path):
    x = np.array([128, 130, 126, 255, 0], dtype=np.uint8)
    p = tmp_path / "r8.wav"
    wavfile.write(p, 100, x)
    src = streams.open_wav_record(p, calibration=1.0, unit="g")
    # RIFF WAVE: 8-bit PCM is unsigned with offset 128
    np.testing.assert_array_equal(gather(src, 2)[:, 0], [0, 2, -2, 127, -128])


def test_mat_v5_columns_are_channels(tmp_path):
    x = data()
    p = tmp_path / "r.mat"
    savemat(p, {"acc": x, "vec": x[:, 0]})
    src = streams.open_mat_record(p, variable="acc", unit="g", fs_hz=FS)
    assert src.n_channels == 3 and src.metadata["format"] == "mat-v5"
    np.testing.assert_array_equal(gather(src), x)
    vec = streams.open_mat_record(p, variable="vec", unit="g", fs_hz=FS)
    np.testing.assert_array_equal(gather(vec)[:, 0], x[:, 0])
    with pytest.raises(InputError, match="variable"):
        streams.open_mat_record(p, variable="nope", unit="g", fs_hz=FS)


def test_mat_v73_through_h5py(tmp_path):
    # MATLAB v7.3 files are HDF5 with column-major arrays: an n x 3 MATLAB matrix is
    # stored 3 x n (MathWorks MAT-file v7.3 documentation); written here with h5py.
    x = data()
    p = tmp_path / "r73.mat"
    with h5py.File(p, "w") as f:
        f.create_dataset("acc", data=x.T, chunks=(3, 1000), compression="gzip")
        f.create_dataset("vec", data=x[:, :1].T)  # a MATLAB column vector n x 1 -> 1 x n
        f.create_dataset("row", data=x[:, :1])  # a MATLAB row vector 1 x n -> n x 1
    src = streams.open_mat_record(p, variable="acc", unit="g", fs_hz=FS)
    assert src.metadata["format"] == "mat-v7.3" and src.n_samples == 5003
    np.testing.assert_array_equal(gather(src), x)
    vec = streams.open_mat_record(p, variable="vec", unit="g", fs_hz=FS)
    assert vec.n_channels == 1
    np.testing.assert_array_equal(gather(vec)[:, 0], x[:, 0])
    row = streams.open_mat_record(p, variable="row", unit="g", fs_hz=FS)
    assert (row.n_samples, row.n_channels) == (5003, 1)
    np.testing.assert_array_equal(gather(row)[:, 0], x[:, 0])


def test_hdf5_dataset_and_rate_attribute(tmp_path):
    x = data()
    p = tmp_path / "r.h5"
    with h5py.File(p, "w") as f:
        d = f.create_dataset("flight/accel", data=x, chunks=(1024, 3))
        d.attrs["fs_hz"] = 2048.0
    src = streams.open_hdf5_record(p, dataset="flight/accel", unit="mg", fs_attribute="fs_hz")
    assert src.fs_hz == 2048.0
    np.testing.assert_allclose(gather(src), x * 1e-3, rtol=1e-15)  # mg -> g: 1e-3
    with pytest.raises(InputError, match="datasets"):
        streams.open_hdf5_record(p, dataset="accel", unit="g", fs_hz=FS)
    with pytest.raises(InputError, match="fs_attribute"):
        streams.open_hdf5_record(p, dataset="flight/accel", unit="g", fs_attribute="rate")


def _uff58(n_records, n=1500, dt=1e-3, labels=None):
    out = []
    x = data(n=n, n_ch=n_records)
    for k in range(n_records):
        out.append(pyuff.prepare_58(
            binary=0, func_type=1, rsp_node=10 + k, rsp_dir=k + 1, ref_node=1, ref_dir=1,
            data=x[:, k] * G0, x=np.arange(n) * dt, id1=f"record {k}", rsp_ent_name="ch",
            ref_ent_name="ch", abscissa_spacing=1, abscissa_spec_data_type=17,
            ordinate_spec_data_type=12, orddenom_spec_data_type=13,
            ordinate_axis_units_lab=(labels or ["m/s^2"] * n_records)[k],
            abscissa_axis_units_lab="s"))
    return x, out


def test_uff58_several_records_become_channels(tmp_path):
    # reference library pyuff writes the dataset 58 records read back here
    x, sets = _uff58(3)
    p = tmp_path / "r.uff"
    pyuff.UFF(str(p)).write_sets(sets, mode="overwrite")
    src = streams.open_uff58_record(p, unit="m/s^2")
    assert src.channel_names == ("node10:1", "node11:2", "node12:3")
    assert src.fs_hz == pytest.approx(1000.0)
    np.testing.assert_allclose(gather(src, 401), x, rtol=1e-6)  # ASCII UFF: ~7 digits
    two = streams.open_uff58_record(p, unit="m/s^2", records=[2, 0])
    np.testing.assert_allclose(gather(two)[:, 0], x[:, 2], rtol=1e-6)
    with pytest.raises(InputError, match="unit"):
        streams.open_uff58_record(p, unit="g")
    with pytest.raises(InputError, match="records"):
        streams.open_uff58_record(p, unit="m/s^2", records=[5])


def test_uff58_records_of_different_length_refused(tmp_path):
    _, a = _uff58(1, n=1000)
    _, b = _uff58(1, n=1200)
    p = tmp_path / "mixed.uff"
    pyuff.UFF(str(p)).write_sets(a + b, mode="overwrite")
    with pytest.raises(InputError, match=r"records\[1\]"):
        streams.open_uff58_record(p, unit="m/s^2")


def test_open_record_by_extension_and_bad_options(tmp_path):
    p = tmp_path / "r.npy"
    np.save(p, data())
    assert streams.open_record(p, fs_hz=FS, unit="g").n_channels == 3
    with pytest.raises(InputError, match="unknown extension"):
        streams.open_record(tmp_path / "r.xyz", unit="g")
    with pytest.raises(InputError, match="options"):
        streams.open_record(p, fs_hz=FS, unit="g", variable="x")
    with pytest.raises(InputError, match="calibration"):
        streams.open_npy_record(p, fs_hz=FS, unit="g", calibration=[1.0, 2.0])
    with pytest.raises(InputError, match="unit"):
        streams.open_npy_record(p, fs_hz=FS, unit="furlongs")
    with pytest.raises(InputError, match="chunk_samples"):
        next(streams.open_npy_record(p, fs_hz=FS, unit="g").chunks(0))
    bad = tmp_path / "nan.npy"
    v = data()
    v[1234, 2] = np.nan
    np.save(bad, v)
    with pytest.raises(InputError, match=r"ch2\[1234\]"):
        gather(streams.open_npy_record(bad, fs_hz=FS, unit="g"))
