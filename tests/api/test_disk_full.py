"""A full disk under the API: the upload's spooled file cannot be written (ENOSPC):
503 naming the disk full, nothing stored."""

from __future__ import annotations

import errno
import os

from starlette.datastructures import UploadFile

from tests.api.conftest import unique

CSV_OK = b"freq_hz,asd_g2_hz\n20,0.01\n80,0.04\n500,0.04\n2000,0.01\n"


def test_upload_on_a_full_disk_is_503_disk_full(eng, world, monkeypatch):
    before = eng.get("/environments", params={"product_id": world["unit"]["id"],
                                              "limit": 500}).json()["total"]

    async def full(self, data):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(UploadFile, "write", full)
    r = eng.post("/environments/upload", expect=503,
                 files={"file": ("psd.csv", CSV_OK, "text/csv")},
                 data={"product_id": str(world["unit"]["id"]), "name": unique("up"),
                       "kind": "random", "axis": "Z", "value_units": "g^2/Hz"})
    body = r.json()
    assert r.headers["content-type"].startswith("application/problem+json")
    assert body["title"] == "Service unavailable: disk full"
    assert "ENOSPC" in body["detail"] and "nothing was saved" in body["detail"]
    monkeypatch.undo()
    after = eng.get("/environments", params={"product_id": world["unit"]["id"],
                                             "limit": 500}).json()["total"]
    assert after == before
