"""Fixed points, problem details, pagination, ETags and body limits of the HTTP API."""

from __future__ import annotations

from tests.api.conftest import API, GEVS_QUAL, MAX_UPLOAD, Api, share, unique


def test_health_is_open_and_requirements_need_a_token(client, callers):
    assert client.get(f"{API}/health").json()["status"] == "ok"
    for who in ("none", "revoked", "garbage"):
        r = client.get(f"{API}/requirements", headers=callers[who].headers)
        assert r.status_code == 401, who
        assert r.headers["WWW-Authenticate"] == "Bearer"
        assert r.headers["content-type"] == "application/problem+json"
        body = r.json()
        assert body["status"] == 401 and body["type"].endswith("unauthenticated")
        assert body["title"] and body["detail"]


def test_requirements_listed_for_a_viewer(viewer):
    page = viewer.get("/requirements").json()
    assert set(page) == {"items", "total", "offset", "limit"} and page["limit"] == 50


def test_openapi_and_docs_under_api_v1(client):
    spec = client.get(f"{API}/openapi.json").json()
    assert f"{API}/requirements" in spec["paths"]
    assert spec["components"]["securitySchemes"]["HTTPBearer"]["scheme"] == "bearer"
    assert client.get(f"{API}/docs").status_code == 200


def test_pagination(eng):
    program = eng.post("/programs", {"name": unique("paged")}).json()
    share(eng, program["id"])
    for i in range(7):
        eng.post("/phases", {"program_id": program["id"], "name": f"phase {i}",
                             "duration_s": 10.0 + i, "position": i})
    page = eng.get(f"/programs/{program['id']}/phases", params={"offset": 2, "limit": 3}).json()
    assert page["total"] == 7 and page["offset"] == 2 and page["limit"] == 3
    assert [p["name"] for p in page["items"]] == ["phase 2", "phase 3", "phase 4"]
    r = eng.get(f"/programs/{program['id']}/phases", params={"limit": 501}, expect=422)
    assert r.json()["field"] == "limit" and r.json()["value"] == "501"
    eng.get(f"/programs/{program['id']}/phases", params={"offset": -1}, expect=422)


def test_program_etag_and_if_match(eng):
    program = eng.post("/programs", {"name": unique("etag")}).json()
    share(eng, program["id"])
    path = f"/programs/{program['id']}"
    r = eng.get(path)
    assert r.headers["ETag"] == '"1"'
    r = eng.patch(path, {"description": "no If-Match"}, expect=428)
    assert r.json()["field"] == "If-Match"
    r = eng.patch(path, {"description": "first"}, headers={"If-Match": '"1"'})
    assert r.headers["ETag"] == '"2"' and r.json()["version"] == 2
    r = eng.patch(path, {"description": "lost?"}, headers={"If-Match": '"1"'}, expect=412)
    assert r.json()["current_version"] == 2
    eng.patch(path, {"description": "x"}, headers={"If-Match": "nonsense"}, expect=412)
    eng.patch(path, {"description": "x"}, headers={"If-Match": "*"}, expect=428)
    eng.patch(path, {"description": "weak"}, headers={"If-Match": 'W/"2"'})
    assert eng.get(path).json()["description"] == "weak"


def test_unknown_ids_are_404_problems(viewer):
    for path in ("/programs/999999", "/products/999999", "/environments/999999",
                 "/levels/999999", "/requirements/999999", "/policies/999999",
                 "/environments/999999/revisions", "/requirements/999999/evidence",
                 "/programs/999999/products", "/programs/999999/products/tree"):
        r = viewer.get(path, expect=404)
        assert r.headers["content-type"] == "application/problem+json", path
        assert r.json()["status"] == 404
    viewer.get("/no-such-route", expect=404)
    viewer.get("/audit", params={"program_id": 999999}, expect=404)


def test_validation_problem_names_the_field(eng, world):
    body = {"product_id": world["unit"]["id"], "name": "bad", "kind": "random", "axis": "Z",
            "data": {"freq_hz": [20.0, 20.0, 2000.0], "asd_g2_hz": [0.01, 0.02, 0.01]}}
    r = eng.post("/environments", body, expect=422)
    assert r.headers["content-type"] == "application/problem+json"
    assert r.json()["field"] == "data.freq_hz[1]" and r.json()["value"] == 20.0
    # a pydantic fault: loc -> dotted field
    r = eng.post("/phases", {"program_id": world["program"]["id"], "name": "p",
                             "duration_s": -1}, expect=422)
    assert r.json()["field"] == "duration_s" and r.json()["value"] == -1
    assert r.json()["errors"][0]["rule"]
    # broken JSON
    r = eng.request("POST", "/programs", expect=422, content=b"{not json",
                    headers={"Content-Type": "application/json"})
    assert r.json()["status"] == 422
    # an unknown axis
    r = eng.post("/environments", {**body, "axis": "Q", "data": GEVS_QUAL}, expect=422)
    assert r.json()["field"] == "axis" and r.json()["value"] == "Q"
    assert eng.get("/environments", params={"product_id": world["unit"]["id"]}).json()[
        "total"] == 1


def test_oversize_body_is_413_and_nothing_is_stored(eng, world):
    n = MAX_UPLOAD // 8
    freq = [20.0 + i for i in range(n)]
    body = {"product_id": world["unit"]["id"], "name": "huge", "kind": "random", "axis": "Z",
            "data": {"freq_hz": freq, "asd_g2_hz": [0.01] * n}}
    r = eng.post("/environments", body, expect=413)
    assert r.headers["content-type"] == "application/problem+json"
    assert r.json()["limit_bytes"] == MAX_UPLOAD
    page = eng.get("/environments", params={"product_id": world["unit"]["id"]}).json()
    assert [e["name"] for e in page["items"]] == ["launch random"]


def test_duplicate_name_is_409(eng):
    name = unique("dup")
    eng.post("/programs", {"name": name})
    r = eng.post("/programs", {"name": name}, expect=409)
    assert r.json()["type"].endswith("conflict")


def test_api_class_smoke(client, callers):
    assert Api(client, callers["viewer"]).get("/policies").json()["total"] >= 2



def test_traceability_matrix_offers_the_web_filters(eng):
    """GET /programs/{id}/traceability filters by status and orders by key descending,
    as the web's matrix does (both call planning's traceability)."""
    prog = eng.post("/programs", {"name": unique("trace")}).json()
    share(eng, prog["id"])
    prod = eng.post("/products", {"program_id": prog["id"], "name": "box"}).json()
    for key in ("T-1", "T-2", "T-3"):
        eng.post("/requirements", {"program_id": prog["id"], "key": key,
                                   "text": f"requirement {key}", "product_id": prod["id"],
                                   "method": "inspection"})
    got = eng.get(f"/programs/{prog['id']}/traceability?sort=key&dir=desc").json()
    assert [x["requirement"]["key"] for x in got["items"]] == ["T-3", "T-2", "T-1"]
    assert got["total"] == 3 and all(x["requirement"]["status"] == "open" for x in got["items"])
    assert eng.get(f"/programs/{prog['id']}/traceability?status=verified").json()["total"] == 0
    eng.get(f"/programs/{prog['id']}/traceability?status=done", expect=422)
    found = eng.get(f"/programs/{prog['id']}/traceability?q=T-2").json()["items"]
    assert [x["requirement"]["key"] for x in found] == ["T-2"]
