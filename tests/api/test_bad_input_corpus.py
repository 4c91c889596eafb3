"""The bad-input corpus through the API: JSON bodies, path and query values, uploads.

Every case is refused with a problem+json answer naming the field (422; 404 for an id
no row can have) and leaves the database exactly as it was: the row count and a hash
of the content of every table are compared before and after.
"""

from __future__ import annotations

import json
import math
from datetime import UTC, datetime, timedelta

import pytest

from tests.api.conftest import GEVS_ACC, Api, share, unique
from tests.corpus import changed, db_state, npy_bytes, npz_bytes, wav_bytes

PROBLEM = "application/problem+json"


# --- the world the cases act on (made once, through the API) -----------------------------


@pytest.fixture(scope="module")
def w(client, callers):
    eng = Api(client, callers["engineer"])
    program = eng.post("/programs", {"name": unique("corpus")}).json()
    share(eng, program["id"])
    unit = eng.post("/products", {"program_id": program["id"], "name": "unit"}).json()
    phase = eng.post("/phases", {"program_id": program["id"], "name": "launch",
                                 "duration_s": 120.0}).json()
    env = eng.post("/environments", {
        "product_id": unit["id"], "phase_id": phase["id"], "name": "launch random",
        "kind": "random", "axis": "Z", "data": GEVS_ACC}).json()
    th = eng.post("/environments", {
        "product_id": unit["id"], "name": "record", "kind": "time_history", "axis": "Z",
        "data": {"dt_s": 0.001, "accel_g": [0.0, 1.0, -1.0, 0.5]}}).json()
    rev = eng.get(f"/environments/{env['id']}/revisions").json()["items"][0]
    pols = eng.get("/policies", params={"limit": 500}).json()["items"]
    gevs = next(p for p in pols if p["name"] == "spaceflight-gevs")
    copy = eng.post(f"/policies/{gevs['id']}/copy", {"name": unique("corpus policy")}).json()
    req = eng.post("/requirements", {
        "program_id": program["id"], "key": unique("REQ"), "text": "random Z",
        "product_id": unit["id"], "method": "analysis"}).json()
    other = eng.post("/requirements", {
        "program_id": program["id"], "key": unique("REQ"), "text": "similar",
        "product_id": unit["id"], "method": "similarity"}).json()
    return {"$program": program["id"], "$product": unit["id"], "$phase": phase["id"],
            "$env": env["id"], "$th": th["id"], "$revision": rev["id"], "$policy": copy["id"],
            "$policy_version": copy["version"], "$gevs": gevs["id"], "$req": req["id"],
            "$req_version": req["version"], "$other": other["id"], "rules": copy["rules"]}


def fill(value, w):
    if isinstance(value, str) and value in w:
        return w[value]
    if isinstance(value, str):
        for k, v in w.items():
            if k.startswith("$") and k in value:
                value = value.replace(k, str(v))
        return value
    if isinstance(value, list):
        return [fill(v, w) for v in value]
    if isinstance(value, dict):
        return {k: fill(v, w) for k, v in value.items()}
    return value


@pytest.fixture
def unchanged(factory):
    before = db_state(factory)
    yield
    after = db_state(factory)
    assert after == before, changed(before, after)


def send(api: Api, method: str, path: str, body, **kw):
    """A JSON request whose body may hold NaN and Infinity (as JavaScript writes them;
    Python's json module reads them)."""
    headers = {"Content-Type": "application/json", **kw.pop("headers", {})}
    return api.request(method, path, None, content=json.dumps(body, allow_nan=True),
                       headers=headers, **kw)


def assert_problem(r, status=422, field: str | None = None):
    assert r.status_code == status, (r.status_code, r.text[:800])
    assert r.headers["content-type"].startswith(PROBLEM), r.headers["content-type"]
    body = r.json()
    assert body["status"] == status and body["detail"]
    if status == 422:
        assert body.get("field"), body
        if field is not None:
            assert field in body["field"] or field in body["detail"], body
    return body


# --- JSON bodies: a valid body per route, then mutated field by field ---------------------

SINE = {"bands": [
    # 2 g at 20 Hz as a displacement in mm peak-to-peak, X = 2 A g0 / (2 pi f)^2
    {"f_lo_hz": 5.0, "f_hi_hz": 20.0, "quantity": "displacement",
     "amplitude": 2e3 * 2 * 2.0 * 9.80665 / (2 * math.pi * 20.0) ** 2 / 2,
     "measure": "peak_to_peak"},
    {"f_lo_hz": 20.0, "f_hi_hz": 100.0, "quantity": "acceleration", "amplitude": 2.0}],
    "sweep": {"rate_oct_per_min": 2.0, "direction": "up", "sweeps": 1}}
SHOCK = {"freq_hz": [100.0, 1000.0, 2000.0], "accel_g": [10.0, 100.0, 100.0], "q": 10.0}

ROUTES = {
    "program": ("POST", "/programs", {"name": "P", "description": "d"}),
    "product": ("POST", "/products", {"program_id": "$program", "name": "box",
                                      "part_number": "B-1", "mass_kg": 1.5}),
    "phase": ("POST", "/phases", {"program_id": "$program", "name": "road",
                                  "duration_s": 60.0, "occurrences": 2}),
    "environment": ("POST", "/environments", {
        "product_id": "$product", "phase_id": "$phase", "name": "env", "kind": "random",
        "axis": "X", "source": "spec", "data": GEVS_ACC}),
    "revision": ("POST", "/environments/$env/revisions", {"data": GEVS_ACC, "note": "n"}),
    "copy": ("POST", "/policies/$gevs/copy", {"name": "copy"}),
    "level": ("POST", "/levels", {
        "product_id": "$product", "name": "lvl", "kind": "random", "axis": "Z",
        "revision_ids": ["$revision"], "policy_id": "$gevs", "max_breakpoints": 12}),
    "requirement": ("POST", "/requirements", {
        "program_id": "$program", "key": "K-1", "text": "t", "product_id": "$product",
        "method": "analysis", "required_margin": 0.0}),
    "analysis": ("POST", "/requirements/$req/evidence/analysis", {
        "applied": 100.0, "allowable": 150.0, "units": "MPa", "factor_of_safety": 1.25}),
    "test record": ("POST", "/requirements/$req/evidence/test", {
        "freq_hz": [20.0, 2000.0], "values": [0.01, 0.01], "duration_s": 60.0, "shocks": 1}),
    "inspection": ("POST", "/requirements/$req/evidence/inspection",
                   {"passed": True, "note": "seen"}),
    "similarity": ("POST", "/requirements/$other/evidence/similarity",
                   {"similar_requirement_id": "$req", "rationale": "same box, same mount"}),
}

NUMBER_FIELDS = {
    "product": ["mass_kg"], "phase": ["duration_s", "occurrences"],
    "level": ["max_breakpoints"], "requirement": ["required_margin"],
    "analysis": ["applied", "allowable", "factor_of_safety"],
    "test record": ["duration_s", "shocks"],
}
ID_FIELDS = {
    "product": ["program_id"], "phase": ["program_id"],
    "environment": ["product_id", "phase_id"], "level": ["product_id", "policy_id"],
    "requirement": ["program_id", "product_id"], "similarity": ["similar_requirement_id"],
}
NAME_FIELDS = {
    "program": ["name"], "product": ["name"], "phase": ["name"], "environment": ["name"],
    "copy": ["name"], "level": ["name"], "requirement": ["key"], "analysis": ["units"],
}
TEXT_FIELDS = {
    "program": ["description"], "environment": ["source"], "revision": ["note"],
    "requirement": ["text"], "analysis": ["note"], "inspection": ["note"],
    "similarity": ["rationale"],
}

BAD_NUMBERS = [("string", "2"), ("boolean", True), ("nan", math.nan), ("inf", math.inf),
               ("-inf", -math.inf), ("list", [1.0])]
BAD_IDS = [("string", "1"), ("zero", 0), ("negative", -1), ("2^31", 2**31),
           ("2^63", 2**63), ("2^70", 2**70), ("float", 1.5)]
BAD_NAMES = [("empty", ""), ("blank", "   "), ("newline", "a\nb,1,2"), ("nul", "a\x00b"),
             ("escape", "\x1b[2J\x1b[31mred"), ("too long", "x" * 201), ("number", 5),
             ("line separator", "a\u2028b")]
BAD_TEXTS = [("nul", "ok\x00"), ("escape", "\x1b]0;title\x07"), ("number", 7)]


def _cases():
    out = []
    for route, fields in NUMBER_FIELDS.items():
        for f in fields:
            for tag, bad in BAD_NUMBERS:
                out.append(pytest.param(route, {f: bad}, f, id=f"number-{route}-{f}-{tag}"))
    for route, fields in ID_FIELDS.items():
        for f in fields:
            for tag, bad in BAD_IDS:
                out.append(pytest.param(route, {f: bad}, f, id=f"id-{route}-{f}-{tag}"))
    for route, fields in NAME_FIELDS.items():
        for f in fields:
            for tag, bad in BAD_NAMES:
                out.append(pytest.param(route, {f: bad}, f, id=f"name-{route}-{f}-{tag}"))
    for route, fields in TEXT_FIELDS.items():
        for f in fields:
            for tag, bad in BAD_TEXTS:
                out.append(pytest.param(route, {f: bad}, f, id=f"text-{route}-{f}-{tag}"))
    for route in ROUTES:
        out.append(pytest.param(route, {"colour": "red"}, "colour", id=f"unknown-key-{route}"))
    return out


@pytest.mark.parametrize("route, change, field", _cases())
def test_json_field(client, callers, w, unchanged, route, change, field):
    method, path, body = ROUTES[route]
    body = {**fill(body, w), **change}
    api = Api(client, callers["engineer"])
    r = send(api, method, fill(path, w), body)
    if r.status_code == 404:  # an id no row can have is not found
        assert field.endswith("_id"), r.text
        assert_problem(r, 404)
    else:
        assert_problem(r, 422, field)


# --- environment data of each kind --------------------------------------------------------


def _band(i, **kw):
    bands = json.loads(json.dumps(SINE["bands"]))
    bands[i].update(kw)
    return {**SINE, "bands": bands}


DATA_CASES = [
    ("random", {**GEVS_ACC, "freq_hz": ["20", "50", "800", "2000"]}, "freq_hz[0]"),
    ("random", {**GEVS_ACC, "asd_g2_hz": [0.013, math.nan, 0.08, 0.013]}, "asd_g2_hz[1]"),
    ("random", {**GEVS_ACC, "asd_g2_hz": [0.013, math.inf, 0.08, 0.013]}, "asd_g2_hz[1]"),
    ("random", {**GEVS_ACC, "asd_g2_hz": [0.013, True, 0.08, 0.013]}, "asd_g2_hz[1]"),
    ("random", {**GEVS_ACC, "duration_s": 0}, "duration_s"),
    ("random", {**GEVS_ACC, "duration_s": "60"}, "duration_s"),
    ("random", {**GEVS_ACC, "duration_s": -math.inf}, "duration_s"),
    ("random", {**GEVS_ACC, "grms": 10.0}, "grms"),
    ("random", {"freq_hz": [20.0, 20.0], "asd_g2_hz": [0.01, 0.01]}, "freq_hz[1]"),
    ("random", {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, -0.01]}, "asd_g2_hz"),
    ("random", {"freq_hz": [20.0], "asd_g2_hz": [0.01]}, "freq_hz"),
    ("random", {"freq_hz": [], "asd_g2_hz": []}, "freq_hz"),
    ("random", {"freq_hz": "20,2000", "asd_g2_hz": [0.01, 0.01]}, "freq_hz"),
    ("shock", {**SHOCK, "q": "10"}, "q"),
    ("shock", {**SHOCK, "q": 0.4}, "q"),
    ("shock", {**SHOCK, "q": math.nan}, "q"),
    ("shock", {**SHOCK, "count": 0}, "count"),
    ("shock", {**SHOCK, "count": "1"}, "count"),
    ("shock", {**SHOCK, "count": 10**12}, "count"),
    ("shock", {**SHOCK, "accel_g": [10.0, 100.0]}, "accel_g"),
    ("sine", _band(0, unit="m", amplitude=2.0), "data.bands"),  # 2 m: 1497 g
    ("sine", _band(0, amplitude=2.0 * 40), "bands[1]"),  # 80 mm: bands do not meet
    ("sine", _band(1, amplitude=20.0), "bands[1]"),  # 20 g after a 2 g crossover
    ("sine", _band(1, f_lo_hz=25.0), "bands[1]"),  # a gap between the bands
    ("sine", _band(0, unit="inch"), "bands[0].unit"),
    ("sine", _band(1, unit="mm"), "bands[1].unit"),
    ("sine", _band(0, amplitude="2"), "bands[0].amplitude"),
    ("sine", _band(0, amplitude=math.nan), "bands[0].amplitude"),
    ("sine", _band(0, amplitude=0.0), "bands[0].amplitude"),
    ("sine", _band(0, measure="rms"), "bands[0].measure"),
    ("sine", _band(1, measure="peak_to_peak"), "bands[1].measure"),
    ("sine", _band(0, quantity="jerk"), "bands[0].quantity"),
    ("sine", _band(0, colour="red"), "bands[0].colour"),
    ("sine", _band(1, f_hi_hz=1e6), "bands[1].f_hi_hz"),
    ("sine", _band(0, f_lo_hz="5"), "bands[0].f_lo_hz"),
    ("sine", {**SINE, "sweep": {**SINE["sweep"], "sweeps": "2"}}, "sweep.sweeps"),
    ("sine", {**SINE, "sweep": {**SINE["sweep"], "sweeps": 0}}, "sweep.sweeps"),
    ("sine", {**SINE, "sweep": {**SINE["sweep"], "rate_oct_per_min": 0}}, "rate_oct_per_min"),
    ("sine", {**SINE, "sweep": {**SINE["sweep"], "rate_oct_per_min": "2"}}, "rate_oct_per_min"),
    ("sine", {**SINE, "sweep": {**SINE["sweep"], "direction": "sideways"}}, "direction"),
    ("sine", {**SINE, "sweep": {**SINE["sweep"], "speed": 1}}, "sweep.speed"),
    ("sine", {**SINE, "dwell": {}}, "dwell"),
    ("sine", {**SINE, "bands": []}, "bands"),
    ("time_history", {"dt_s": 0, "accel_g": [0.0, 1.0]}, "dt_s"),
    ("time_history", {"dt_s": "0.001", "accel_g": [0.0, 1.0]}, "dt_s"),
    ("time_history", {"dt_s": 0.001, "accel_g": [0.0, math.nan]}, "accel_g[1]"),
    ("time_history", {"dt_s": 0.001, "accel_g": [0.0]}, "accel_g"),
    ("time_history", {"dt_s": 0.001, "accel_g": ["0", "1"]}, "accel_g[0]"),
]


@pytest.mark.parametrize("kind, data, field", DATA_CASES,
                         ids=[f"data-{k}-{i}" for i, (k, _, _) in enumerate(DATA_CASES)])
def test_environment_data(eng, w, unchanged, kind, data, field):
    r = send(eng, "POST", "/environments", {"product_id": w["$product"],
                                            "name": unique("env"), "kind": kind, "axis": "X",
                                            "data": data})
    assert_problem(r, 422, field)


@pytest.mark.parametrize("kind, data, field", DATA_CASES[:13],
                         ids=[f"revision-{i}" for i in range(13)])
def test_revision_data(eng, w, unchanged, kind, data, field):
    r = send(eng, "POST", f"/environments/{w['$env']}/revisions", {"data": data})
    assert_problem(r, 422, field)


@pytest.mark.parametrize("change, field", [
    ({"kind": "vibration"}, "kind"), ({"axis": "W"}, "axis"), ({"axis": "x "}, "axis"),
    ({"kind": None}, "kind"), ({"data": [1, 2]}, "data"), ({"data": "x"}, "data"),
], ids=["unknown-kind", "unknown-axis", "axis-space", "kind-null", "data-list", "data-text"])
def test_environment_enums(eng, w, unchanged, change, field):
    body = {"product_id": w["$product"], "name": unique("env"), "kind": "random",
            "axis": "X", "data": GEVS_ACC, **change}
    assert_problem(eng.post("/environments", body, expect=None), 422, field)


# --- policy rules, validated when saved ---------------------------------------------------


def _rules(w, path: str, value):
    rules = json.loads(json.dumps(w["rules"]))
    *head, last = path.split(".")
    node = rules
    for p in head:
        node = node[p]
    node[last] = value
    return rules


RULE_CASES = [
    ("colour", "red", "colour"),
    ("equivalence.colour", 1, "colour"),
    ("random.qualification.colour", 1, "colour"),
    ("equivalence.f_lo_hz", 5000.0, "f_hi_hz"),
    ("equivalence.f_hi_hz", 0.0, "f_hi_hz"),
    ("equivalence.b", [0.0], "b"),
    ("equivalence.b", [-4.0], "b"),
    ("equivalence.b", [], "b"),
    ("equivalence.b", ["8"], "b"),
    ("equivalence.q", 0.5, "q"),
    ("equivalence.points_per_octave", 0, "points_per_octave"),
    ("equivalence.fds_margin_db", math.nan, "fds_margin_db"),
    ("analysis.margin_db", -math.inf, "margin_db"),
    ("analysis.margin_db", "3", "margin_db"),
    ("random.qualification.margin_db", math.inf, "margin_db"),
    ("random.qualification.tolerance_db", 0.0, "tolerance_db"),
    ("random.qualification.duration_s", -60.0, "duration_s"),
    ("random.qualification.minimum_profile", {"freq_hz": [20.0, 2000.0]}, "minimum_profile"),
    ("random.qualification.minimum_profile",
     {"freq_hz": [2000.0, 20.0], "asd_g2_hz": [0.01, 0.01]}, "minimum_profile"),
    ("random.qualification.minimum_profile",
     {"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.01, math.nan]}, "minimum_profile"),
    ("random.bogus_grade", {"margin_db": 3.0}, "bogus_grade"),
    ("sine.qualification.factor", 0.0, "factor"),
    ("sine.qualification.sweeps", 1.5, "sweeps"),
    ("sine.qualification.direction", "sideways", "direction"),
    ("shock.qualification.lower_db", 1.0, "lower_db"),
    ("shock.qualification.outer_lower_db", -1.0, "outer_lower_db"),
    ("shock.qualification.outer_upper_db", 1.0, "outer_upper_db"),
    ("shock.qualification.min_share_within_band", 1.5, "min_share_within_band"),
    ("shock.qualification.shocks_per_direction", 2**40, "shocks_per_direction"),
    ("shock.qualification.q", "10", "q"),
]


@pytest.mark.parametrize("path, value, field", RULE_CASES,
                         ids=[f"rules-{p}-{i}" for i, (p, _, _) in enumerate(RULE_CASES)])
def test_policy_rules(eng, w, unchanged, path, value, field):
    r = send(eng, "PUT", f"/policies/{w['$policy']}/rules", {"rules": _rules(w, path, value)},
             headers={"If-Match": f'"{w["$policy_version"]}"'})
    assert_problem(r, 422, field)


# --- requirements: edits, waivers ---------------------------------------------------------


@pytest.mark.parametrize("change, field", [
    ({"required_margin": -math.inf}, "required_margin"),
    ({"required_margin": math.nan}, "required_margin"),
    ({"required_margin": "1"}, "required_margin"),
    ({"text": "ok\x00"}, "text"), ({"level_id": 2**63}, "level_id"),
    ({"method": "hope"}, "method"), ({"colour": 1}, "colour"),
], ids=["margin-minf", "margin-nan", "margin-str", "text-nul", "level-2^63", "method",
        "unknown"])
def test_requirement_edit(eng, w, unchanged, change, field):
    body = dict(change)
    r = send(eng, "PATCH", f"/requirements/{w['$req']}", body,
             headers={"If-Match": f'"{w["$req_version"]}"'})
    assert_problem(r, 422, field)


def _day(days: float) -> str:
    return (datetime.now(UTC) + timedelta(days=days)).isoformat()


@pytest.mark.parametrize("change, field", [
    ({"expires_at": _day(4000)}, "expires_at"),
    ({"expires_at": "275000-01-01T00:00:00Z"}, "expires_at"),  # 10^8 days from now
    ({"expires_at": "9999-12-31T23:59:59Z"}, "expires_at"),
    ({"expires_at": _day(-1)}, "expires_at"),
    ({"expires_at": "tomorrow"}, "expires_at"),
    ({"expires_at": 1e8}, "expires_at"),
    ({"rationale": "short"}, "rationale"),
    ({"rationale": "long enough\x00 but NUL"}, "rationale"),
    ({"approver": "someone else"}, "approver"),
], ids=["4000-days", "1e8-days", "year-9999", "past", "text", "number", "short",
        "nul", "unknown-key"])
def test_waiver(client, callers, w, unchanged, change, field):
    approver = Api(client, callers["approver"])
    body = {"rationale": "accepted by the review board", "expires_at": _day(30), **change}
    r = approver.post(f"/requirements/{w['$req']}/waivers", body, expect=None)
    assert_problem(r, 422, field)


# --- users (admin) ------------------------------------------------------------------------


@pytest.mark.parametrize("body, field", [
    ({"name": "a\x00b", "role": "viewer"}, "name"), ({"name": "a\nb", "role": "viewer"}, "name"),
    ({"name": "", "role": "viewer"}, "name"), ({"name": "ok", "role": "god"}, "role"),
    ({"name": "\x1b[1mbold", "role": "viewer"}, "name"),
    ({"name": "ok", "role": "viewer", "admin": True}, "admin"),
], ids=["nul", "newline", "empty", "role", "escape", "unknown-key"])
def test_user(client, callers, unchanged, body, field):
    admin = Api(client, callers["admin"])
    assert_problem(admin.post("/users", body, expect=None), 422, field)


# --- path and query values ----------------------------------------------------------------

PATHS = [
    "/programs/{}", "/products/{}", "/programs/{}/products", "/programs/{}/phases",
    "/environments/{}", "/environments/{}/revisions", "/policies/{}", "/levels/{}",
    "/requirements/{}", "/requirements/{}/status", "/requirements/{}/evidence",
]


@pytest.mark.parametrize("path", PATHS)
@pytest.mark.parametrize("value", [2**31, 2**63, 2**64, 2**70, 0])
def test_ids_beyond_the_database(eng, unchanged, path, value):
    assert_problem(eng.get(path.format(value), expect=None), 404)


@pytest.mark.parametrize("path", PATHS[:4])
@pytest.mark.parametrize("value", ["-1", "1e3", "x", "%00"])
def test_ids_that_are_not_ids(eng, unchanged, path, value):
    r = eng.get(path.format(value), expect=None)
    assert r.status_code in (404, 422), r.text
    assert_problem(r, r.status_code)


@pytest.mark.parametrize("query", [
    {"offset": -1}, {"limit": 0}, {"limit": 10**6}, {"offset": "x"},
    {"product_id": 2**70}, {"program_id": "a\x00"}, {"offset": 2**70},
], ids=["offset-neg", "limit-0", "limit-big", "offset-text", "product-2^70", "program-nul",
        "offset-2^70"])
def test_list_queries(eng, unchanged, query):
    r = eng.get("/environments", params=query, expect=None)
    assert r.status_code in (200, 404, 422), r.text
    if r.status_code != 200:  # a 422 may name no field when the database refused a value
        assert r.headers["content-type"].startswith(PROBLEM) and r.json()["detail"]


# --- uploads ------------------------------------------------------------------------------

CSV = "text/csv"
UPLOADS = [
    ("latin-1", "random", "psd.csv", "freq_hz,asd\n20,0.01\n2000,0.01\n# café\n".encode(
        "latin-1"), {}, "UTF-8"),
    ("nul", "random", "psd.csv", b"20,0.01\n\x00,0.01\n", {}, "NUL"),
    ("extra-column", "shock", "srs.csv", b"100,10,5\n1000,100,5\n", {"value_units": "g"},
     "columns"),
    ("extra-column-random", "random", "psd.csv", b"20,0.01,1\n2000,0.01,1\n", {}, "columns"),
    ("underscore", "random", "psd.csv", b"20,0.01\n2_000,0.01\n", {}, "row 2"),
    ("nan-cell", "random", "psd.csv", b"20,0.01\n2000,nan\n", {}, "row 2"),
    ("inf-cell", "random", "psd.csv", b"20,0.01\n2000,inf\n", {}, "row 2"),
    ("hex-cell", "random", "psd.csv", b"20,0.01\n0x7d0,0.01\n", {}, "row 2"),
    ("one-row", "random", "psd.csv", b"20,0.01\n", {}, "file"),
    ("header-only", "random", "psd.csv", b"freq_hz,asd_g2_hz\n", {}, "file"),
    ("descending", "random", "psd.csv", b"2000,0.01\n20,0.01\n", {}, "freq_hz"),
    ("negative", "random", "psd.csv", b"20,0.01\n2000,-0.01\n", {}, "asd_g2_hz"),
    ("no-units", "random", "psd.csv", b"20,0.01\n2000,0.01\n", {"value_units": ""},
     "value_units"),
    ("wrong-units", "random", "psd.csv", b"20,0.01\n2000,0.01\n", {"value_units": "g"},
     "value_units"),
    ("empty", "random", "psd.csv", b"", {}, "file"),
    ("unknown-suffix", "random", "psd.exe", b"MZ\x90\x00", {}, "file"),
    ("json-strings", "random", "psd.json",
     json.dumps({"freq_hz": ["20", "2000"], "asd_g2_hz": [0.01, 0.01]}).encode(), {},
     "freq_hz[0]"),
    ("json-nan", "random", "psd.json", b'{"freq_hz": [20, 2000], "asd_g2_hz": [NaN, 0.01]}',
     {}, "asd_g2_hz[0]"),
    ("json-unknown-key", "random", "psd.json",
     json.dumps({**GEVS_ACC, "grms": 10}).encode(), {}, "grms"),
    ("json-list", "random", "psd.json", b"[1, 2]", {}, "file"),
    ("json-broken", "random", "psd.json", b'{"freq_hz": [20,', {}, "file"),
    ("json-sine-metres", "sine", "sine.json",
     json.dumps(_band(0, unit="m", amplitude=2.0)).encode(), {}, "bands"),
    ("two-columns-with-rate", "time_history", "rec.csv",
     b"time_s,accel_g\n0,0.1\n0.001,0.2\n0.002,0.3\n0.003,0.1\n",
     {"value_units": "g", "sample_rate_hz": "1000"}, "fs_hz"),
    ("three-columns", "time_history", "rec.csv",
     b"t,a,b\n0,0.1,1\n0.001,0.2,1\n0.002,0.3,1\n", {"value_units": "g"}, "columns"),
    ("time-gap", "time_history", "rec.csv", b"0,0.1\n0.001,0.2\n0.005,0.3\n0.006,0.1\n",
     {"value_units": "g"}, "gap"),
    ("rate-inf", "time_history", "rec.csv", b"0.1\n0.2\n0.3\n",
     {"value_units": "g", "sample_rate_hz": "inf"}, "sample_rate_hz"),
    ("rate-zero", "time_history", "rec.csv", b"0.1\n0.2\n0.3\n",
     {"value_units": "g", "sample_rate_hz": "0"}, "sample_rate_hz"),
    ("npz-as-npy", "time_history", "rec.npy", npz_bytes(),
     {"value_units": "g", "sample_rate_hz": "1000"}, ".npy"),
    ("npy-text", "time_history", "rec.npy", npy_bytes(["a", "b", "c"]),
     {"value_units": "g", "sample_rate_hz": "1000"}, "values"),
    ("npy-2d", "time_history", "rec.npy", npy_bytes([[1.0, 2.0], [3.0, 4.0]]),
     {"value_units": "g", "sample_rate_hz": "1000"}, "values"),
    ("npy-nan", "time_history", "rec.npy", npy_bytes([1.0, math.nan, 2.0]),
     {"value_units": "g", "sample_rate_hz": "1000"}, "values"),
    ("npy-garbage", "time_history", "rec.npy", b"\x93NUMPY garbage",
     {"value_units": "g", "sample_rate_hz": "1000"}, "path"),
    ("npy-no-rate", "time_history", "rec.npy", npy_bytes([1.0, 2.0, 3.0]),
     {"value_units": "g"}, "sample_rate_hz"),
    ("wav-truncated", "time_history", "rec.wav", wav_bytes(truncate=40),
     {"value_units": "g", "calibration": "0.001"}, "truncated"),
    ("wav-0-hz", "time_history", "rec.wav", wav_bytes(fs=0),
     {"value_units": "g", "calibration": "0.001"}, "sample_rate"),
    ("wav-garbage", "time_history", "rec.wav", b"RIFF\x00\x00\x00\x00WAVEjunk",
     {"value_units": "g", "calibration": "0.001"}, "path"),
    ("wav-no-calibration", "time_history", "rec.wav", wav_bytes(),
     {"value_units": "g"}, "calibration"),
    ("mat-garbage", "time_history", "rec.mat", b"MATLAB 5.0 MAT-file junk" * 4,
     {"value_units": "g", "variable": "x", "sample_rate_hz": "100"}, "path"),
    ("uff-garbage", "time_history", "rec.uff", b"    -1\n    58\nnonsense\n",
     {"value_units": "g"}, "path"),
]


@pytest.mark.parametrize("kind, filename, content, form, needle",
                         [u[1:] for u in UPLOADS], ids=[f"upload-{u[0]}" for u in UPLOADS])
def test_upload(eng, w, unchanged, kind, filename, content, form, needle):
    data = {"product_id": str(w["$product"]), "name": unique("up"), "kind": kind, "axis": "Z",
            "value_units": "g^2/Hz", **form}
    if data["value_units"] == "":
        del data["value_units"]
    r = eng.post("/environments/upload", files={"file": (filename, content, CSV)},
                 data=data, expect=None)
    body = assert_problem(r, 422)
    assert needle.lower() in (body["field"] + " " + body["detail"]).lower(), body


@pytest.mark.parametrize("kind, filename, content, form, needle",
                         [u[1:] for u in UPLOADS if u[1] == "time_history"],
                         ids=[f"revision-upload-{u[0]}" for u in UPLOADS
                              if u[1] == "time_history"])
def test_revision_upload(eng, w, unchanged, kind, filename, content, form, needle):
    r = eng.post(f"/environments/{w['$th']}/revisions/upload",
                 files={"file": (filename, content, CSV)}, data=form, expect=None)
    body = assert_problem(r, 422)
    assert needle.lower() in (body["field"] + " " + body["detail"]).lower(), body


@pytest.mark.parametrize("form, field", [
    ({"product_id": "1e3"}, "product_id"), ({"product_id": str(2**70)}, "product"),
    ({"axis": "Q"}, "axis"), ({"kind": "noise"}, "kind"), ({"name": ""}, "name"),
    ({"name": "a\nb"}, "name"), ({"phase_id": "-1"}, "phase"),
], ids=["product-float", "product-2^70", "axis", "kind", "name-empty", "name-newline",
        "phase-negative"])
def test_upload_form_fields(eng, w, unchanged, form, field):
    data = {"product_id": str(w["$product"]), "name": unique("up"), "kind": "random",
            "axis": "Z", "value_units": "g^2/Hz", **form}
    r = eng.post("/environments/upload",
                 files={"file": ("psd.csv", b"20,0.01\n2000,0.01\n", CSV)}, data=data,
                 expect=None)
    assert r.status_code in (404, 422), r.text
    body = assert_problem(r, r.status_code)
    assert field in json.dumps(body), body


def test_similarity_cycle_is_refused_and_status_reads_survive(eng, w, factory):
    """A similarity claim that would close a cycle is refused; reading stays finite."""
    prog = w["$program"]

    def req(method):
        return eng.post("/requirements", {"program_id": prog, "key": unique("CYC"),
                                          "text": "t", "product_id": w["$product"],
                                          "method": method}).json()

    a, b = req("analysis"), req("similarity")
    eng.post(f"/requirements/{a['id']}/evidence/analysis",
             {"applied": 1.0, "allowable": 2.0, "units": "kN"})
    eng.post(f"/requirements/{b['id']}/evidence/similarity",
             {"similar_requirement_id": a["id"], "rationale": "same bracket, same load"})
    assert eng.get(f"/requirements/{b['id']}/status").json()["status"] == "verified"
    before = db_state(factory)
    r = eng.post(f"/requirements/{a['id']}/evidence/similarity",
                 {"similar_requirement_id": b["id"], "rationale": "the other way round"},
                 expect=None)
    assert_problem(r, 422, "similar_requirement_id")
    assert "cycle" in r.json()["detail"]
    assert db_state(factory) == before
