"""Long multi-channel records through the existing upload routes: stored in chunks, with
their own (larger) upload limit; every other upload keeps the ordinary limit."""

from __future__ import annotations

import io
import math

import numpy as np
import pytest
from fastapi.testclient import TestClient

from qualplan.api.app import create_app
from qualplan.config import Settings
from tests.api.conftest import API, MAX_UPLOAD, unique


def _npy(x: np.ndarray) -> bytes:
    buf = io.BytesIO()
    np.save(buf, x)
    return buf.getvalue()


def _three_channels(n: int, fs: float) -> np.ndarray:
    t = np.arange(n) / fs
    # peaks 1, 2 and 3 g: rms = peak / sqrt(2) over whole periods; fs / f a multiple of 4,
    # so a sample falls on each crest (closed form)
    return np.column_stack([a * np.sin(2 * np.pi * f * t)
                            for a, f in ((1.0, 100.0), (2.0, 200.0), (3.0, 500.0))])


def test_record_upload_is_stored_in_chunks_beyond_the_ordinary_limit(eng, world):
    fs, n = 4000.0, 12_000  # 3 s; 3 x 12000 x 8 bytes = 288 kB > the 64 KiB limit
    x = _three_channels(n, fs)
    body = _npy(x)
    assert len(body) > MAX_UPLOAD
    form = {"product_id": str(world["unit"]["id"]), "kind": "time_history", "axis": "all",
            "value_units": "g", "sample_rate_hz": str(fs), "channel_axes": "X, Y, Z",
            "name": unique("flight")}
    env = eng.post("/environments/upload",
                   files={"file": ("flight.npy", body, "application/octet-stream")},
                   data=form).json()
    assert env["kind"] == "time_history" and env["latest_revision"] == 1
    rev = eng.get(f"/environments/{env['id']}/revisions").json()["items"][0]
    rec = rev["spec"]["record"]
    assert rec["n_samples"] == n and rec["n_channels"] == 3 and rec["source"].startswith(
        "flight.npy")
    assert rec["n_chunks"] == math.ceil(n / rec["chunk_samples"])
    for c, peak in enumerate((1.0, 2.0, 3.0)):
        assert rec["stats"][c]["rms"]["value"] == pytest.approx(peak / math.sqrt(2), rel=1e-9)
        assert rec["stats"][c]["rms"]["unit"] == "g rms"

    # a new revision through the revision upload route, with the expected revision
    y = _three_channels(n, fs) * 2.0
    rev2 = eng.post(f"/environments/{env['id']}/revisions/upload",
                    files={"file": ("flight2.npy", _npy(y), "application/octet-stream")},
                    data={"value_units": "g", "sample_rate_hz": str(fs),
                          "channel_axes": "X,Y,Z", "note": "second run"},
                    headers={"If-Match": '"1"'}).json()
    assert rev2["number"] == 2
    assert rev2["spec"]["record"]["stats"][2]["peak"]["value"] == pytest.approx(6.0, rel=1e-6)
    # a stale If-Match is refused
    r = eng.post(f"/environments/{env['id']}/revisions/upload",
                 files={"file": ("flight3.npy", _npy(y * 3), "application/octet-stream")},
                 data={"value_units": "g", "sample_rate_hz": str(fs), "channel_axes": "X,Y,Z"},
                 headers={"If-Match": '"1"'}, expect=412).json()
    assert r["status"] == 412
    assert eng.get(f"/environments/{env['id']}").json()["latest_revision"] == 2


@pytest.mark.parametrize("form, field", [
    ({"channel_axes": "X,Y"}, "channel_axes"),          # three channels in the file
    ({"channel_axes": "X,,Z"}, "channel_axes[1]"),
    ({"sample_rate_hz": ""}, "sample_rate_hz"),
    ({"value_units": ""}, "value_units"),
    ({"kind": "random"}, "channel_axes"),
])
def test_bad_record_uploads_name_the_field_and_store_nothing(eng, world, form, field):
    fs = 1000.0
    data = {"product_id": str(world["unit"]["id"]), "kind": "time_history", "axis": "all",
            "value_units": "g", "sample_rate_hz": str(fs), "channel_axes": "X,Y,Z",
            "name": unique("bad"), **form}
    before = eng.get(f"/environments?product_id={world['unit']['id']}").json()["total"]
    r = eng.post("/environments/upload",
                 files={"file": ("r.npy", _npy(_three_channels(3000, fs)), "application/x")},
                 data=data, expect=422).json()
    assert r["field"] == field, r
    assert eng.get(f"/environments?product_id={world['unit']['id']}").json()["total"] == before


def test_a_table_keeps_the_ordinary_limit_on_the_record_route(eng, world):
    rows = MAX_UPLOAD // 10 + 10
    big = "\n".join(f"{20 + i * 0.001:.3f},0.01" for i in range(rows)).encode()
    r = eng.post("/environments/upload", files={"file": ("psd.csv", big, "text/csv")},
                 data={"product_id": str(world["unit"]["id"]), "name": unique("big"),
                       "kind": "random", "axis": "Z", "value_units": "g^2/Hz"},
                 expect=413).json()
    assert r["limit_bytes"] == MAX_UPLOAD and "channel_axes" in r["detail"]
    # a JSON body elsewhere keeps the ordinary limit too
    r2 = eng.post("/programs", {"name": "x" * (MAX_UPLOAD + 10)}, expect=413).json()
    assert r2["limit_bytes"] == MAX_UPLOAD


def test_the_record_limit_is_its_own_setting(db_url, callers, world):
    app = create_app(Settings(database_url=db_url, max_upload_bytes=MAX_UPLOAD,
                              max_record_upload_bytes=200_000))
    body = _npy(_three_channels(12_000, 4000.0))  # 288 kB
    with TestClient(app) as c:
        r = c.post(API + "/environments/upload", headers=callers["engineer"].headers,
                   files={"file": ("r.npy", body, "application/octet-stream")},
                   data={"product_id": str(world["unit"]["id"]), "kind": "time_history",
                         "axis": "all", "value_units": "g", "sample_rate_hz": "4000",
                         "channel_axes": "X,Y,Z", "name": unique("big")})
    assert r.status_code == 413
    p = r.json()
    assert p["limit_bytes"] == 200_000 and "QUALPLAN_MAX_RECORD_UPLOAD_BYTES" in p["detail"]
