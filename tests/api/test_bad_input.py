"""Bad input through the API: broken files, wrong units, unknown ids, oversize uploads.
Each gets a clear problem (field and value) and leaves the database unchanged."""

from __future__ import annotations

import pytest
from sqlalchemy import func, select

from qualplan.store.base import Base
from tests.api.conftest import MAX_UPLOAD, unique


def _counts(factory) -> dict[str, int]:
    with factory() as session:
        return {t.name: session.scalar(select(func.count()).select_from(t))
                for t in Base.metadata.sorted_tables}


@pytest.fixture
def unchanged(factory):
    """Assert that the requests of the test stored nothing (row counts of every table)."""
    before = {}

    def snapshot():
        before.clear()
        before.update(_counts(factory))

    def check():
        after = _counts(factory)
        assert after == before, {k: (before[k], after[k]) for k in after if after[k] != before[k]}

    return snapshot, check


def _upload(eng, world, content: bytes, filename="psd.csv", expect=422, **form):
    data = {"product_id": str(world["unit"]["id"]), "name": unique("up"), "kind": "random",
            "axis": "Z", "value_units": "g^2/Hz", **form}
    return eng.post("/environments/upload", files={"file": (filename, content, "text/csv")},
                    data=data, expect=expect).json()


CSV_OK = b"freq_hz,asd_g2_hz\n20,0.01\n80,0.04\n500,0.04\n2000,0.01\n"


def test_good_upload_is_stored(eng, world):
    env = _upload(eng, world, CSV_OK, expect=201)
    rev = eng.get(f"/environments/{env['id']}/revisions").json()["items"][0]
    # NASA-STD-7001B minimum workmanship spectrum, 6.8 g rms printed
    assert rev["summary"]["grms"]["value"] == pytest.approx(6.78, abs=0.01)
    assert "uploaded file psd.csv" in env["provenance"]
    # the same table in (m/s^2)^2/Hz: divided by g0^2 on the way in (g0 = 9.80665 m/s^2)
    g2 = 9.80665 ** 2
    text = "\n".join(f"{f},{a * g2}" for f, a in [(20, 0.01), (80, 0.04), (500, 0.04),
                                                 (2000, 0.01)]).encode()
    env2 = _upload(eng, world, text, expect=201, value_units="(m/s^2)^2/Hz")
    rev2 = eng.get(f"/environments/{env2['id']}/revisions").json()["items"][0]
    assert rev2["spec"]["asd_g2_hz"] == pytest.approx([0.01, 0.04, 0.04, 0.01], rel=1e-12)


@pytest.mark.parametrize("content, filename, form, field", [
    (b"freq,asd\n20,0.01\n80,lots\n", "psd.csv", {}, "row 2 column 2"),
    (b"", "psd.csv", {}, "file"),
    (b"\xff\xfe\x00garbage", "psd.csv", {}, "file"),
    (b"freq,asd\n20,0.01\n", "psd.csv", {}, "file"),
    (b"{not json", "psd.json", {}, "file"),
    (b"[1, 2]", "psd.json", {}, "file"),
    (b'{"freq_hz": [20, 20], "asd_g2_hz": [0.01, 0.01]}', "psd.json", {}, "data.freq_hz[1]"),
    (CSV_OK, "psd.xlsx", {}, "file"),
    (CSV_OK, "psd.csv", {"value_units": "psi"}, "value_units"),
    (CSV_OK, "psd.csv", {"value_units": "g"}, "value_units"),
    (b"20,0.01\n2000,-0.01\n", "psd.csv", {}, "data.asd_g2_hz[1]"),
    (CSV_OK, "psd.csv", {"axis": "sideways"}, "axis"),
    (CSV_OK, "psd.csv", {"product_id": "999999"}, None),
])
def test_broken_uploads_are_refused(eng, world, unchanged, content, filename, form, field):
    snapshot, check = unchanged
    snapshot()
    expect = 404 if form.get("product_id") == "999999" else 422
    problem = _upload(eng, world, content, filename, expect=expect, **form)
    assert problem["detail"] and problem["status"] == expect
    if field is not None:
        assert problem["field"] == field, problem
        assert "value" in problem
    check()


def test_missing_units_are_refused(eng, world, unchanged):
    snapshot, check = unchanged
    snapshot()
    data = {"product_id": str(world["unit"]["id"]), "name": "x", "kind": "random", "axis": "Z"}
    r = eng.post("/environments/upload", files={"file": ("psd.csv", CSV_OK, "text/csv")},
                 data=data, expect=422).json()
    assert r["field"] == "value_units" and "g^2/Hz" in r["detail"]
    check()


def test_oversize_upload_is_413_and_stores_nothing(eng, world, unchanged):
    snapshot, check = unchanged
    snapshot()
    rows = MAX_UPLOAD // 10 + 10
    big = "\n".join(f"{20 + i * 0.001:.3f},0.01" for i in range(rows)).encode()
    assert len(big) > MAX_UPLOAD
    r = _upload(eng, world, big, expect=413)
    assert r["limit_bytes"] == MAX_UPLOAD and r["field"] == "body"
    check()


def test_oversize_chunked_body_is_413(client, callers, world, unchanged):
    """No Content-Length: the limit is counted on the stream."""
    snapshot, check = unchanged
    snapshot()

    def chunks():
        yield b'{"name": "' + b"x" * 1000
        for _ in range(MAX_UPLOAD // 1000 + 2):
            yield b"x" * 1000
        yield b'"}'

    r = client.post("/api/v1/programs", content=chunks(),
                    headers={**callers["engineer"].headers, "Content-Type": "application/json"})
    assert r.status_code == 413
    check()


def test_unknown_ids_store_nothing(eng, world, unchanged):
    snapshot, check = unchanged
    snapshot()
    pid, uid = world["program"]["id"], world["unit"]["id"]
    eng.post("/products", {"program_id": 999999, "name": "x"}, expect=404)
    eng.post("/phases", {"program_id": 999999, "name": "x", "duration_s": 1.0}, expect=404)
    eng.post("/environments", {"product_id": 999999, "name": "x", "kind": "random",
                               "axis": "Z", "data": {}}, expect=404)
    eng.post("/environments", {"product_id": uid, "phase_id": 999999, "name": "x",
                               "kind": "random", "axis": "Z", "data": {}}, expect=404)
    eng.post("/environments/999999/revisions", {"data": {}}, expect=404)
    r = eng.post("/levels", {"product_id": uid, "name": "x", "kind": "random", "axis": "Z",
                             "revision_ids": [999999], "policy_id": world["policy"]["id"]},
                 expect=404).json()
    assert r["entity"] == "environment revision" and r["key"] == 999999
    eng.post("/levels", {"product_id": uid, "name": "x", "kind": "random", "axis": "Z",
                         "revision_ids": [1], "policy_id": 999999}, expect=404)
    eng.post("/requirements", {"program_id": pid, "key": unique("K"), "text": "t",
                               "product_id": 999999, "method": "test"}, expect=404)
    eng.post("/requirements", {"program_id": pid, "key": unique("K"), "text": "t",
                               "product_id": uid, "level_id": 999999, "method": "test"},
             expect=404)
    for kind in ("analysis", "inspection", "similarity", "test"):
        eng.post(f"/requirements/999999/evidence/{kind}", {}, expect=422)
    eng.post("/requirements/999999/evidence/inspection", {"passed": True, "note": "fits"},
             expect=404)
    eng.post("/policies/999999/copy", {"name": "x"}, expect=404)
    eng.patch("/requirements/999999", {"text": "x"}, headers={"If-Match": '"1"'},
              expect=404)
    check()


def test_wrong_kind_and_units_in_json_bodies(eng, world, unchanged):
    snapshot, check = unchanged
    snapshot()
    uid = world["unit"]["id"]
    base = {"product_id": uid, "name": "x", "kind": "random", "axis": "Z"}
    cases = [
        ({**base, "data": {"freq_hz": [20, 2000], "accel_g": [1, 1]}}, "data.accel_g"),
        ({**base, "data": {"freq_hz": [20, 2000], "asd_g2_hz": [0.01, "0.01"]}},
         "data.asd_g2_hz[1]"),
        ({**base, "kind": "shock", "data": {"freq_hz": [100, 1000], "accel_g": [10, 100],
                                            "q": -1}}, "data.q"),
        ({**base, "kind": "vibration", "data": {}}, "kind"),
        ({**base, "data": {"freq_hz": [20, 2000], "asd_g2_hz": [0.01, 0.01]},
          "colour": "red"}, "colour"),
    ]
    for body, field in cases:
        r = eng.post("/environments", body, expect=422).json()
        assert r["field"] == field, (body, r)
    env = world["env"]
    r = eng.post(f"/environments/{env['id']}/revisions",
                 {"data": {"freq_hz": [20, 10], "asd_g2_hz": [0.01, 0.01]}}, expect=422).json()
    assert r["field"] == "data.freq_hz[1]" and r["value"] == 10
    r = eng.post(f"/requirements/{0}/evidence/analysis",
                 {"applied": "a lot", "allowable": 1, "units": "MPa"}, expect=422).json()
    assert r["field"] == "applied" and r["value"] == "a lot"
    check()


def test_requirement_edit_refused_leaves_it_unchanged(eng, world, unchanged):
    req = eng.post("/requirements", {"program_id": world["program"]["id"], "key": unique("E"),
                                     "text": "t", "product_id": world["unit"]["id"],
                                     "method": "analysis"}).json()
    snapshot, check = unchanged
    snapshot()
    path = f"/requirements/{req['id']}"
    eng.patch(path, {"text": ""}, headers={"If-Match": '"1"'}, expect=422)
    eng.patch(path, {"version": 7}, headers={"If-Match": '"1"'}, expect=422)
    eng.patch(path, {"level_id": 999999}, headers={"If-Match": '"1"'}, expect=404)
    eng.patch(path, {"method": "guesswork"}, headers={"If-Match": '"1"'}, expect=422)
    for field in ("text", "method", "acceptance_criterion", "required_margin"):
        r = eng.patch(path, {field: None}, headers={"If-Match": '"1"'}, expect=422).json()
        assert r["field"] == field
    check()
    assert eng.get(path).json()["version"] == 1
