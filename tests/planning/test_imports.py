"""Files to environment data: breakpoint tables, records in declared units."""

from __future__ import annotations

import io

import numpy as np
import pytest

from qualplan.planning.errors import ValidationFailed
from qualplan.planning.imports import environment_data_from_file
from qualplan.store.models import EnvironmentKind as K

G0 = 9.80665  # standard gravity [m/s^2] (CGPM 1901)


def test_csv_breakpoints_in_si_units_are_converted_to_g():
    content = b"# invented table\nHz,(m/s^2)^2/Hz\n20,9.6170\n2000,9.6170\n"
    data, array = environment_data_from_file(K.random, "t.csv", content,
                                             value_units="(m/s^2)^2/Hz")
    assert array is None
    # 9.6170 (m/s^2)^2/Hz / g0^2 = 0.1 g^2/Hz (closed form)
    assert data["asd_g2_hz"] == pytest.approx([9.6170 / G0**2] * 2)
    assert data["freq_hz"] == [20.0, 2000.0]


def test_csv_record_with_time_column_and_one_column_with_rate():
    t = np.arange(200) / 1000.0
    x = np.sin(2 * np.pi * 50 * t) * G0
    two = "\n".join(f"{a:.6f},{b:.9f}" for a, b in zip(t, x, strict=True)).encode()
    data, arr = environment_data_from_file(K.time_history, "r.csv", b"t,a\n" + two,
                                           value_units="m/s^2")
    assert data["dt_s"] == pytest.approx(1e-3)
    assert arr.max() == pytest.approx(1.0, abs=1e-6)
    one = "\n".join(f"{b:.9f}" for b in x).encode()
    data, arr = environment_data_from_file(K.time_history, "r.csv", one, value_units="m/s^2",
                                           sample_rate_hz=1000.0)
    assert arr.size == 200 and data["dt_s"] == pytest.approx(1e-3)


def test_npy_record_needs_a_rate_and_units():
    buf = io.BytesIO()
    np.save(buf, np.ones(10))
    with pytest.raises(ValidationFailed, match="sample_rate_hz"):
        environment_data_from_file(K.time_history, "r.npy", buf.getvalue(), value_units="g")
    with pytest.raises(ValidationFailed, match="value_units"):
        environment_data_from_file(K.time_history, "r.npy", buf.getvalue(),
                                   sample_rate_hz=100.0)
    data, arr = environment_data_from_file(K.time_history, "r.npy", buf.getvalue(),
                                           value_units="g", sample_rate_hz=100.0)
    assert arr.size == 10 and data["dt_s"] == 0.01


def test_record_with_a_gap_is_refused():
    content = b"t,a\n0,0\n0.001,1\n0.002,0\n0.010,1\n0.011,0\n"
    with pytest.raises(ValidationFailed) as exc:
        environment_data_from_file(K.time_history, "gap.csv", content, value_units="g")
    assert "t" in exc.value.field or "time" in str(exc.value)


@pytest.mark.parametrize("name, content, match", [
    ("e.csv", b"", "is empty"),
    ("e.csv", b"Hz,g2\n20,abc\n2000,0.01\n", "not a number"),
    ("e.bin", b"123", "json or .csv"),
    ("e.json", b"{not json", "not valid JSON"),
])
def test_bad_files_name_what_is_wrong(name, content, match):
    with pytest.raises(ValidationFailed, match=match):
        environment_data_from_file(K.random, name, content, value_units="g^2/Hz")
