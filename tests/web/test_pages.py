"""The pages through a TestClient: sessions, CSRF, roles, bad input, downloads."""

from __future__ import annotations

import json
import re
import time

import pytest

from qualplan.planning import access, environments, evidence, levels, policies, requirements
from qualplan.planning import schemas as s
from qualplan.store import models as m
from qualplan.store.session import unit_of_work
from qualplan.web import auth
from tests.web.conftest import SETUP, unique

# NASA-STD-7001B minimum workmanship random vibration: 20-80 Hz +3 dB/oct, 80-500 Hz
# 0.04 g^2/Hz, 500-2000 Hz -3 dB/oct; 6.8 g rms printed (NASA-STD-7001B).
WORKMANSHIP_CSV = b"frequency [Hz],ASD [g^2/Hz]\n20,0.01\n80,0.04\n500,0.04\n2000,0.01\n"
ALERT = re.compile(r'role="alert"[^>]*>(.*?)</div>', re.S)


def alert(html: str) -> str:
    found = ALERT.findall(html)
    return re.sub(r"<[^>]+>", "", found[0]).strip() if found else ""


def env_count(factory, product_id: int) -> int:
    with unit_of_work(factory) as session:
        return len(environments.list_environments(session, product_id=product_id))


def upload(b, world, content=WORKMANSHIP_CSV, units="g^2/Hz", name=None, **extra):
    data = {"name": name or unique("flight Z"), "kind": "random", "axis": "Z",
            "phase_id": str(world.phase_id), "value_units": units, "freq_units": "Hz", **extra}
    b.get(f"/products/{world.product_id}")
    return b.post(f"/products/{world.product_id}/environments", data,
                  files={"file": ("flight.csv", content, "text/csv")})


# --- sessions ---------------------------------------------------------------------------------


def test_pages_need_a_sign_in(browserless, world):
    b = browserless()
    r = b.client.get(f"/products/{world.product_id}", follow_redirects=False)
    assert r.status_code == 303
    assert r.headers["location"] == f"/signin?next=%2Fproducts%2F{world.product_id}"


def test_pages_carry_the_security_headers_and_the_api_does_not(browserless, users):
    """Every page (a redirect and the sign-in form alike) says what it may load, no
    sniffing and no referrer to other sites (OWASP Secure Headers Project); the API's
    JSON answers do not carry the page policy."""
    b = browserless()
    for r in (b.client.get("/signin"), b.client.get("/programs", follow_redirects=False)):
        assert r.headers["content-security-policy"].startswith("default-src 'self'")
        assert "frame-ancestors 'none'" in r.headers["content-security-policy"]
        assert r.headers["x-content-type-options"] == "nosniff"
        assert r.headers["referrer-policy"] == "same-origin"
        assert len(r.headers.get_list("content-security-policy")) == 1
    api = b.client.get("/api/v1/health")
    assert api.status_code == 200 and "content-security-policy" not in api.headers


def test_session_cookie_flags_and_no_token_inside(browserless, users):
    b = browserless()
    b.get("/signin")
    r = b.client.post("/signin", data={"csrf": b.csrf, "token": users["engineer"].token,
                                       "next": "/programs"}, follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"] == "/programs"
    cookie = r.headers["set-cookie"]
    assert "HttpOnly" in cookie and "samesite=strict" in cookie.lower()
    assert "Secure" not in cookie  # plain http in the test
    value = r.cookies[auth.COOKIE]
    assert users["engineer"].token not in value
    assert users["engineer"].token[3:20] not in value


def test_secure_flag_behind_tls(settings, users):
    from fastapi.testclient import TestClient

    from qualplan.service import create_service

    app = create_service(settings.model_copy(update={"behind_tls": True}))
    with TestClient(app) as client:
        r = client.get("/signin")
        assert "Secure" in r.headers["set-cookie"]


def test_wrong_token_gives_a_message(browserless):
    b = browserless()
    b.get("/signin")
    r = b.post("/signin", {"token": "qp_not-a-token"})
    assert r.status_code == 401 and "unknown or revoked" in r.text


def test_tampered_cookie_is_signed_out(browserless, users):
    b = browserless(users["engineer"])
    value = b.client.cookies[auth.COOKIE]
    payload, mac = value.rsplit(".", 1)
    b.client.cookies.set(auth.COOKIE, payload + "." + mac[::-1])
    r = b.client.get("/programs", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/signin")


def test_revoked_token_ends_the_session(browserless, factory):
    name = unique("eng")
    with unit_of_work(factory) as session:
        access.create_user(session, SETUP, name, m.Role.engineer)
        token = access.create_token(session, SETUP, name, "web")
    b = browserless()
    b.sign_in(token)
    assert b.client.get("/programs").status_code == 200
    with unit_of_work(factory) as session:
        access.revoke_token(session, SETUP, token[:10])
    r = b.client.get("/programs", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/signin")


def test_sign_out_clears_the_session(browserless, users):
    b = browserless(users["viewer"])
    b.get("/programs")
    r = b.post("/signout", {})
    assert "/signin" in str(r.url)
    r = b.client.get("/programs", follow_redirects=False)
    assert r.status_code == 303


def test_signer_refuses_forgery_and_expiry(monkeypatch):
    signer = auth.Signer(b"k1")
    ws = auth.WebSession.new("ab" * 32)
    assert signer.load(signer.dump(ws)) == ws
    assert auth.Signer(b"k2").load(signer.dump(ws)) is None
    # a cookie signed longer ago than the lifetime is refused (itsdangerous max_age)
    real = time.time
    monkeypatch.setattr(time, "time", lambda: real() - auth.MAX_AGE_S - 5)
    old = signer.dump(ws)
    monkeypatch.setattr(time, "time", real)
    assert signer.load(old) is None
    assert signer.csrf_ok(ws, signer.csrf(ws))
    assert not signer.csrf_ok(ws, signer.csrf(auth.WebSession.new()))
    assert not signer.csrf_ok(ws, None)
    assert not signer.csrf_ok(ws, "not.a-signature")


def test_copied_cookie_is_refused_after_sign_out(browserless, users):
    b = browserless(users["viewer"])
    assert b.client.get("/programs").status_code == 200
    copied = b.client.cookies[auth.COOKIE]
    b.post("/signout", {})
    other = browserless()
    other.client.cookies.set(auth.COOKIE, copied)
    r = other.client.get("/programs", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/signin")


def test_deactivating_a_user_ends_its_sign_ins(browserless, factory):
    name = unique("eng")
    with unit_of_work(factory) as session:
        access.create_user(session, SETUP, name, m.Role.engineer)
        token = access.create_token(session, SETUP, name, "web")
    b = browserless()
    b.sign_in(token)
    assert b.client.get("/programs").status_code == 200
    with unit_of_work(factory) as session:
        access.set_user(session, SETUP, name, active=False)
    r = b.client.get("/programs", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/signin")


# --- CSRF and roles ---------------------------------------------------------------------------


def test_post_without_csrf_is_refused_and_stores_nothing(browserless, users, world, factory):
    b = browserless(users["engineer"])
    r = b.post(f"/products/{world.product_id}/environments", {"name": "x", "kind": "random",
               "axis": "Z", "value_units": "g^2/Hz"}, csrf=False,
               files={"file": ("f.csv", WORKMANSHIP_CSV, "text/csv")})
    assert r.status_code == 403 and "CSRF" in r.text
    r = b.post("/programs", {"name": unique("p"), "csrf": "forged"})
    assert r.status_code == 403
    assert env_count(factory, world.product_id) == 0


def test_viewer_sees_no_edit_forms(browserless, users, world):
    b = browserless(users["viewer"])
    for path in ("/programs", f"/programs/{world.program_id}", f"/products/{world.product_id}",
                 f"/programs/{world.program_id}/requirements"):
        html = b.get(path).text
        actions = re.findall(r'<form method="post" action="([^"]+)"', html)
        assert actions == ["/signout"], path  # the sign-out button only


def test_viewer_forged_post_is_refused(browserless, users, world, factory):
    b = browserless(users["viewer"])
    r = upload(b, world)  # valid CSRF token of the viewer's own session
    assert r.status_code == 403
    assert "needs the role engineer" in alert(r.text)
    assert env_count(factory, world.product_id) == 0


def test_waive_form_only_for_approvers(browserless, users, world, factory):
    with unit_of_work(factory) as session:
        req = requirements.create_requirement(session, SETUP, s.RequirementCreate(
            program_id=world.program_id, key=unique("STR"), text="Bracket stress",
            product_id=world.product_id, method=m.VerificationMethod.analysis))
        req_id = req.id
    eng = browserless(users["engineer"])
    html = eng.get(f"/requirements/{req_id}").text
    assert "/analyses" in html and "/waivers" not in html
    r = eng.post(f"/requirements/{req_id}/waivers", {"rationale": "accepted by the board",
                                                    "expires_on": "2999-01-01"})
    assert r.status_code == 403 and "waiving a requirement needs the role approver" in r.text
    appr = browserless(users["approver"])
    assert "/waivers" in appr.get(f"/requirements/{req_id}").text
    # a requirement with no evidence at all is waived by an admin only
    soon = time.strftime("%Y-%m-%d", time.gmtime(time.time() + 300 * 86400))
    r = appr.post(f"/requirements/{req_id}/waivers", {"rationale": "accepted by the board",
                                                     "expires_on": soon})
    assert r.status_code == 403 and "no evidence at all" in r.text
    with unit_of_work(factory) as session:
        evidence.add_analysis(session, SETUP, req_id, s.AnalysisEvidenceIn(
            applied=300.0, allowable=276.0, units="MPa"))
    # a waiver runs at most the policy's max_waiver_days (365 by default): 300 days here
    r = appr.post(f"/requirements/{req_id}/waivers", {"rationale": "accepted by the board",
                                                     "expires_on": soon})
    assert r.status_code == 200 and "waived" in r.text


# --- bad input --------------------------------------------------------------------------------


@pytest.mark.parametrize(("content", "units", "says"), [
    (WORKMANSHIP_CSV, "", "say the units of the values"),
    (WORKMANSHIP_CSV, "g", "not a unit for random data"),
    (b"20,0.01\n80,-0.04\n500,0.04\n", "g^2/Hz", "asd_g2_hz[1]"),
    (b"20,0.01\n10,0.04\n500,0.04\n", "g^2/Hz", "freq_hz"),
    (b"20,0.01\n80,abc\n", "g^2/Hz", "row 2 column 2"),
    (b"", "g^2/Hz", "is empty"),
])
def test_bad_environment_file_message_and_nothing_stored(browserless, users, world, factory,
                                                         content, units, says):
    b = browserless(users["engineer"])
    r = upload(b, world, content=content, units=units)
    assert r.status_code == 422
    assert says in alert(r.text), alert(r.text)
    assert "Not saved." in alert(r.text)
    assert env_count(factory, world.product_id) == 0


def test_bad_numbers_in_forms(browserless, users, world, factory):
    b = browserless(users["engineer"])
    b.get(f"/programs/{world.program_id}")
    r = b.post(f"/programs/{world.program_id}/phases", {"name": "road", "duration_s": "ten"})
    assert r.status_code == 422 and "duration_s = &#39;ten&#39;: must be a decimal number" in r.text
    r = b.post(f"/programs/{world.program_id}/phases", {"name": "road", "duration_s": "-5"})
    assert r.status_code == 422 and "duration_s" in alert(r.text)
    r = b.post("/programs", {"name": ""})
    assert r.status_code == 422 and "name" in alert(r.text)
    r = b.post(f"/products/{world.product_id}/levels", {"name": "lvl", "kind": "random",
               "axis": "Z", "policy_id": "1"})
    assert r.status_code == 422 and "revision_ids" in alert(r.text)


def test_upload_plot_summary_and_downloads(browserless, users, world):
    b = browserless(users["engineer"])
    r = upload(b, world, name="flight Z")
    assert r.status_code == 200 and "/environments/" in str(r.url)
    # NASA-STD-7001B workmanship: 6.8 g rms printed; 6.784 g rms exact (closed form)
    assert "6.784 g rms" in r.text
    assert 'type="application/json"' in r.text and "g²/Hz" in r.text
    env_id = int(str(r.url).rstrip("/").split("/")[-1])
    csv = b.get(f"/environments/{env_id}/revisions/1.csv")
    assert csv.headers["content-type"].startswith("text/csv")
    data = [x for x in csv.text.splitlines() if not x.startswith("#")]
    assert data == ["freq_hz,asd_g2_hz", "20,0.01", "80,0.04", "500,0.04", "2000,0.01"]
    assert "# CAUTION: a responsible engineer" in csv.text
    # kHz and (m/s^2)^2/Hz are converted at the edge: 0.04 g^2/Hz = 0.04 * 9.80665^2
    r = b.post(f"/environments/{env_id}/revisions", {
        "value_units": "(m/s^2)^2/Hz", "freq_units": "kHz", "note": "same in SI",
        "expected_revision": "1"}, files={"file": ("si.csv",
            b"0.02,0.9617\n0.08,3.8468\n0.5,3.8468\n2,0.9617\n", "text/csv")})
    assert r.status_code == 200 and "Revision 2" in r.text
    r = b.get(f"/environments/{env_id}?a=1&b=2")
    assert "Largest difference" in r.text


def test_matrix_filters_sorting_and_audit(browserless, users, world, factory):
    with unit_of_work(factory) as session:
        for key, method in (("B-2", m.VerificationMethod.analysis),
                            ("A-1", m.VerificationMethod.inspection)):
            requirements.create_requirement(session, SETUP, s.RequirementCreate(
                program_id=world.program_id, key=key, text=f"req {key}",
                product_id=world.product_id, method=method))
    b = browserless(users["viewer"])
    base = f"/programs/{world.program_id}/requirements"
    html = b.get(base).text
    assert html.index(">A-1<") < html.index(">B-2<")
    html = b.get(base + "?sort=key&dir=desc").text
    assert html.index(">B-2<") < html.index(">A-1<")
    html = b.get(base + "?method=analysis").text
    assert ">B-2<" in html and ">A-1<" not in html
    csv = [x for x in b.get(base + ".csv?method=inspection").text.splitlines()
           if not x.startswith("#")]
    assert len(csv) == 2 and csv[1].startswith("A-1,")
    audit = b.get(f"/programs/{world.program_id}/audit").text
    assert "NOT READY: 2 of 2 requirements block release" in audit
    assert "open" in b.get(f"/programs/{world.program_id}/audit.csv").text


def test_level_page_shows_coverage(browserless, users, world, factory):
    b = browserless(users["engineer"])
    r = upload(b, world, name="flight Z")
    with unit_of_work(factory) as session:
        rev = environments.list_environments(session, product_id=world.product_id)[0]
        rev_id = rev.revisions[-1].id
        gevs = policies.policy_ref(session, "spaceflight-gevs")
        level = levels.derive_level(session, SETUP, s.LevelRecipe(
            product_id=world.product_id, name="qual Z", kind="random", axis=m.Axis.Z,
            revision_ids=[rev_id], policy_id=gevs.id))
        level_id = level.id
    r = b.get(f"/levels/{level_id}")
    assert r.status_code == 200
    assert "FDS coverage: test / life" in r.text and "ERS coverage" in r.text
    assert "worst natural frequency [Hz]" in r.text
    blobs = [json.loads(x) for x in re.findall(
        r'<script type="application/json" id="data-[^"]+">(.*?)</script>', r.text, re.S)]
    assert [p["title"] for p in blobs][1:] == [
        "FDS coverage: test / life", "ERS coverage: test and life", "ERS ratio: test / life"]
    level_plot = blobs[0]
    assert level_plot["yunit"] == "g²/Hz" and level_plot["ylog"]
    names = [x["name"] for x in level_plot["series"]]
    assert "tolerance ±3 dB (upper)" in names and "tolerance ±3 dB (lower)" in names
    main, upper = level_plot["series"][0], level_plot["series"][1]
    # +3 dB on a PSD: x 10^(3/10) (power ratio, closed form)
    assert upper["y"][0] == pytest.approx(main["y"][0] * 10 ** 0.3)
    rows = [x for x in b.get(f"/levels/{level_id}/breakpoints.csv").text.splitlines()
            if not x.startswith("#")]
    assert rows[0] == "freq_hz,asd_g2_hz" and len(rows) >= 3


def test_not_found_page(browserless, users):
    b = browserless(users["viewer"])
    r = b.get("/levels/999999")
    assert r.status_code == 404 and "level 999999 not found" in r.text


def test_pdf_downloads(browserless, users, world, factory):
    pytest.importorskip("weasyprint")
    pytest.importorskip("qualplan.planning.documents")
    pytest.importorskip("qualplan.reports")
    with unit_of_work(factory) as session:
        requirements.create_requirement(session, SETUP, s.RequirementCreate(
            program_id=world.program_id, key="INS-1", text="Label present",
            product_id=world.product_id, method=m.VerificationMethod.inspection))
    b = browserless(users["engineer"])
    html = b.get(f"/programs/{world.program_id}/audit").text
    assert f"/programs/{world.program_id}/audit.pdf" in html
    r = b.get(f"/programs/{world.program_id}/audit.pdf")
    assert r.status_code == 200 and r.content.startswith(b"%PDF")
    r = upload(b, world, name="flight Z")
    with unit_of_work(factory) as session:
        rev = environments.list_environments(session, product_id=world.product_id)[0]
        gevs = policies.policy_ref(session, "spaceflight-gevs")
        levels.derive_level(session, SETUP, s.LevelRecipe(
            product_id=world.product_id, name="qual Z", kind="random", axis=m.Axis.Z,
            revision_ids=[rev.revisions[-1].id], policy_id=gevs.id))
    r = b.get(f"/products/{world.product_id}/specification.pdf?grade=qualification")
    assert r.status_code == 200 and r.content.startswith(b"%PDF")
    r = b.get(f"/products/{world.product_id}/specification.pdf?grade=acceptance")
    assert r.status_code == 422 and "no acceptance test level" in r.text


def _plot_data(html: str) -> list[dict]:
    return [json.loads(x) for x in re.findall(
        r'<script type="application/json" id="data-[^"]+">(.*?)</script>', html, re.S)]


def _upload_json(b, world, kind, data, name):
    b.get(f"/products/{world.product_id}")
    return b.post(f"/products/{world.product_id}/environments",
                  {"name": name, "kind": kind, "axis": "X"},
                  files={"file": ("env.json", json.dumps(data).encode(), "application/json")})


def test_shock_and_sine_plots(browserless, users, world):
    b = browserless(users["engineer"])
    r = _upload_json(b, world, "shock", {"freq_hz": [100.0, 1000.0, 2000.0],
                                         "accel_g": [10.0, 100.0, 100.0], "q": 10}, "pyro")
    assert r.status_code == 200, alert(r.text)
    (shock,) = _plot_data(r.text)
    assert (shock["ylabel"], shock["yunit"]) == ("SRS", "g")
    assert shock["series"][0]["y"] == [10.0, 100.0, 100.0]
    # 5-15 Hz at constant displacement, 15-100 Hz at 1.5 g: the displacement is chosen so
    # that the crossover is continuous, X = A g0 / (2 pi f)^2 (closed form).
    x_pk_pk = 2 * 1.5 * 9.80665 / (2 * 3.141592653589793 * 15.0) ** 2
    r = _upload_json(b, world, "sine", {
        "bands": [{"f_lo_hz": 5.0, "f_hi_hz": 15.0, "quantity": "displacement",
                   "amplitude": x_pk_pk, "unit": "m", "measure": "peak_to_peak"},
                  {"f_lo_hz": 15.0, "f_hi_hz": 100.0, "quantity": "acceleration",
                   "amplitude": 1.5}],
        "sweep": {"rate_oct_per_min": 2.0}}, "engine sine")
    assert r.status_code == 200, alert(r.text)
    (sine,) = _plot_data(r.text)
    assert sine["yunit"] == "g peak"
    f, a = sine["series"][0]["x"], sine["series"][0]["y"]
    assert f[0] == 5.0 and f[-1] == 100.0 and len(f) > 100
    # peak acceleration at constant displacement grows with f^2: 1.5 (5/15)^2 g at 5 Hz
    assert a[0] == pytest.approx(1.5 * (5 / 15) ** 2, rel=1e-9)
    assert a[-1] == pytest.approx(1.5, rel=1e-9)


@pytest.mark.parametrize("target", ["//evil.example/x", "/\\evil.example", "https://evil.example"])
def test_sign_in_never_redirects_off_site(browserless, users, target):
    b = browserless()
    b.get("/signin")
    r = b.client.post("/signin", data={"csrf": b.csrf, "token": users["viewer"].token,
                                       "next": target}, follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"] == "/dashboard"


def test_numbers_for_people():
    from qualplan.web.common import _fmt, _unit

    assert [_fmt(10000.0), _fmt(12345.6), _fmt(6.78416), _fmt([20.0, 2000.0])] == [
        "10000", "12350", "6.784", "20–2000"]
    assert _unit("g^2/Hz") == "g²/Hz" and _unit("(m/s^2)^2/Hz") == "(m/s²)²/Hz"


def test_oversize_upload_is_a_page_and_nothing_stored(browserless, users, world, factory):
    """A browser posting a file over the upload limit gets a page that says so, not the
    API's JSON problem (the limit is the settings' 256 KiB here)."""
    b = browserless(users["engineer"])
    big = b"freq,asd\n" + b"".join(f"{20 + i},0.01\n".encode() for i in range(40_000))
    b.get(f"/products/{world.product_id}")
    r = b.post(f"/products/{world.product_id}/environments",
               {"name": unique("big"), "kind": "random", "axis": "Z", "value_units": "g^2/Hz",
                "freq_units": "Hz"}, files={"file": ("big.csv", big, "text/csv")},
               headers={"Accept": "text/html"})
    assert r.status_code == 413
    assert r.headers["content-type"].startswith("text/html")
    assert "Not saved" in r.text and "262144 bytes" in r.text
    assert env_count(factory, world.product_id) == 0


def test_time_history_page_shows_its_psd_and_srs(browserless, users, world, factory):
    """A record is plotted as spectra: its maximax PSD and its maximax SRS (Q = 10). A
    half-sine of 50 g, 1 ms: the SRS tends to the peak input at high natural frequency
    (Harris ch. 8 high-frequency asymptote: SRS(10 kHz) -> the input's peak)."""
    import numpy as np

    fs = 100_000.0
    t = np.arange(int(0.05 * fs)) / fs
    x = np.where(t < 1e-3, 50.0 * np.sin(np.pi * t / 1e-3), 0.0)
    with unit_of_work(factory) as session:
        env = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=world.product_id, phase_id=world.phase_id, name=unique("drop record"),
            kind=m.EnvironmentKind.time_history, axis=m.Axis.Z,
            data={"dt_s": 1 / fs, "accel_g": x.tolist()}))
        env_id = env.id
    b = browserless(users["viewer"])
    r = b.get(f"/environments/{env_id}")
    assert r.status_code == 200
    data = [json.loads(m_.group(1)) for m_ in re.finditer(
        r'<script type="application/json" id="data-record\d">(.*?)</script>', r.text, re.S)]
    assert [d["ylabel"] for d in data] == ["ASD", "SRS"]
    srs = data[1]["series"][0]
    # the 1/6-octave grid (anchored at 1 kHz) ends below min(10 kHz, fs/10) at 8.98 kHz
    assert 8000.0 < srs["x"][-1] <= 10_000.0
    assert srs["y"][-1] == pytest.approx(50.0, rel=0.03)


def test_long_record_upload_through_the_form_is_stored_in_chunks(browserless, users, world,
                                                                  factory):
    """A 3-channel .npy record over the ordinary 256 KiB limit, sent through the product's
    upload form with its channel axes: stored in chunks (RMS of a sine of peak A is
    A / sqrt(2) over whole periods, closed form)."""
    import io
    import math

    import numpy as np

    from qualplan.planning import records

    fs, n = 8000.0, 16_000
    t = np.arange(n) / fs
    x = np.column_stack([a * np.sin(2 * np.pi * 250.0 * t) for a in (1.0, 2.0, 4.0)])
    buf = io.BytesIO()
    np.save(buf, x)
    assert buf.tell() > 256 * 1024
    b = browserless(users["engineer"])
    b.get(f"/products/{world.product_id}")
    r = b.post(f"/products/{world.product_id}/environments",
               {"name": unique("road"), "kind": "time_history", "axis": "all",
                "value_units": "g", "sample_rate_hz": "8000", "channel_axes": "X,Y,Z"},
               files={"file": ("road.npy", buf.getvalue(), "application/octet-stream")})
    assert r.status_code == 200 and "/environments/" in str(r.url), alert(r.text) or r.text[:300]
    env_id = int(str(r.url).rstrip("/").split("/")[-1])
    with unit_of_work(factory) as session:
        rev = environments.revision(session, env_id, 1)
        rec = records.read_record(session, rev.id)
    assert [c.axis for c in rec.channels] == ["X", "Y", "Z"] and rec.n_samples == n
    assert rec.channels[2].stats["rms"]["value"] == pytest.approx(4 / math.sqrt(2), rel=1e-9)
    # a bad axis list names the field on the form's page, and nothing is stored
    before = env_count(factory, world.product_id)
    r = b.post(f"/products/{world.product_id}/environments",
               {"name": unique("road"), "kind": "time_history", "axis": "all",
                "value_units": "g", "sample_rate_hz": "8000", "channel_axes": "X,Y"},
               files={"file": ("road.npy", buf.getvalue(), "application/octet-stream")})
    assert r.status_code == 422 and "channel_axes" in alert(r.text)
    assert env_count(factory, world.product_id) == before
