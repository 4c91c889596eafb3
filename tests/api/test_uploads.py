"""Uploads through the API: records as files (.npy, .csv), test records as CSV."""

from __future__ import annotations

import io
import math

import numpy as np
import pytest

from qualplan.dynamics import psd
from tests.api.conftest import unique


def _npy(x: np.ndarray) -> bytes:
    buf = io.BytesIO()
    np.save(buf, x)
    return buf.getvalue()


def test_time_history_record_from_npy_and_csv(eng, world):
    fs = 2048.0
    t = np.arange(4096) / fs
    x = 2.0 * np.sin(2 * np.pi * 100.0 * t)  # 2 g peak sine: rms 2/sqrt(2) (closed form)
    form = {"product_id": str(world["unit"]["id"]), "kind": "time_history", "axis": "Z",
            "value_units": "g", "sample_rate_hz": str(fs)}
    env = eng.post("/environments/upload",
                   files={"file": ("rec.npy", _npy(x), "application/octet-stream")},
                   data={**form, "name": unique("rec")}).json()
    rev = eng.get(f"/environments/{env['id']}/revisions").json()["items"][0]
    assert rev["samples"] == 4096 and rev["spec"]["dt_s"] == pytest.approx(1 / fs)
    assert rev["summary"]["rms"]["value"] == pytest.approx(2 / math.sqrt(2), rel=1e-6)
    assert rev["summary"]["rms"]["unit"] == "g rms"
    # the same record in m/s^2 with a time column: converted by g0 = 9.80665 m/s^2
    rows = "\n".join(f"{ti:.7f},{xi * 9.80665:.7f}" for ti, xi in zip(t[:1024], x[:1024],
                                                                        strict=True))
    rev2 = eng.post(f"/environments/{env['id']}/revisions/upload",
                    files={"file": ("rec.csv", ("time_s,accel\n" + rows).encode(), "text/csv")},
                    data={"value_units": "m/s^2", "note": "as csv"},
                    headers={"If-Match": '"1"'}, expect=201).json()
    assert rev2["number"] == 2
    assert rev2["summary"]["peak"]["value"] == pytest.approx(2.0, rel=1e-6)
    # a record without a sample rate is refused, naming the field
    r = eng.post("/environments/upload",
                 files={"file": ("rec.npy", _npy(x), "application/octet-stream")},
                 data={**form, "name": unique("rec"), "sample_rate_hz": ""}, expect=422).json()
    assert r["field"] and r["detail"]


def test_test_record_upload_verifies(eng, viewer, world):
    env_rev = eng.get(f"/environments/{world['env']['id']}/revisions").json()["items"][-1]
    level = eng.post("/levels", {
        "product_id": world["unit"]["id"], "name": "random Z", "kind": "random", "axis": "Z",
        "revision_ids": [env_rev["id"]], "policy_id": world["policy"]["id"]}).json()
    req = eng.post("/requirements", {
        "program_id": world["program"]["id"], "key": unique("ENV"), "text": "random Z",
        "product_id": world["unit"]["id"], "level_id": level["id"], "method": "test"}).json()
    r = level["result"]
    f = r["freq_hz"]
    lines = np.geomspace(f[0], f[-1], int(48 * np.log2(f[-1] / f[0])) + 1)
    values = psd.asd_at(f, r["asd_g2_hz"], lines)  # the demand on controller lines
    text = "freq_hz,asd\n" + "\n".join(f"{a:.12g},{b:.12g}" for a, b in zip(lines, values,
                                                                       strict=True))
    ev = eng.post(f"/requirements/{req['id']}/evidence/test/upload",
                  files={"file": ("control.csv", text.encode(), "text/csv")},
                  data={"value_units": "g^2/Hz", "duration_s": str(r["duration_s"])}).json()
    assert ev["kind"] == "test" and ev["verdict"] == "pass", ev["summary"]
    assert viewer.get(f"/requirements/{req['id']}/status").json()["status"] == "verified"
    r2 = eng.post(f"/requirements/{req['id']}/evidence/test/upload",
                  files={"file": ("control.csv", text.encode(), "text/csv")},
                  data={"duration_s": str(r["duration_s"])}, expect=422).json()
    assert r2["field"] == "value_units"
