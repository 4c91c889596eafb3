"""The bad-input corpus through the web forms: each bad value is refused with the form's
page and a message naming the field (HTTP 422, as the API), and the database is unchanged (row
counts and a content hash of every table)."""

from __future__ import annotations

import re

import pytest

from qualplan.planning import requirements
from qualplan.planning import schemas as s
from qualplan.store.models import VerificationMethod
from qualplan.store.session import unit_of_work
from tests.corpus import changed, db_state, npz_bytes, wav_bytes
from tests.web.conftest import SETUP, unique

ALERT = re.compile(r'role="alert"[^>]*>(.*?)</div>', re.S)
BAD_NAMES = ["", "   ", "two\nlines", "nul\x00byte", "\x1b[31mred", "x" * 201]
BAD_NUMBERS = ["nan", "inf", "-inf", "2_000", "1e999", "0x10", "1,5", "two"]


def _alert(html: str) -> str:
    found = ALERT.findall(html)
    return re.sub(r"<[^>]+>", "", found[0]).strip() if found else ""


@pytest.fixture
def signed(browserless, users):
    return browserless(users["engineer"])


@pytest.fixture
def req_id(factory, world):
    with unit_of_work(factory) as session:
        return requirements.create_requirement(session, SETUP, s.RequirementCreate(
            program_id=world.program_id, key=unique("WEB"), text="bracket strength",
            product_id=world.product_id, method=VerificationMethod.analysis)).id


def _refused(factory, b, page: str, path: str, data: dict, needle: str, **kw):
    b.get(page)
    before = db_state(factory)
    r = b.post(path, data, **kw)
    assert r.status_code == 422, (r.status_code, r.text[:500])
    message = _alert(r.text)
    assert needle in message, message
    assert "\x1b" not in r.text and "\x00" not in r.text
    after = db_state(factory)
    assert after == before, changed(before, after)


@pytest.mark.parametrize("name", BAD_NAMES, ids=repr)
def test_program_name(factory, signed, name):
    _refused(factory, signed, "/programs", "/programs", {"name": name}, "name")


@pytest.mark.parametrize("field, value", [
    *[("mass_kg", v) for v in BAD_NUMBERS], ("mass_kg", "0"), ("mass_kg", "-2"),
    ("parent_id", str(2**70)), ("parent_id", "1.5"), ("parent_id", "-1"),
    *[("name", v) for v in BAD_NAMES],
], ids=lambda v: repr(v)[:20])
def test_product_form(factory, signed, world, field, value):
    data = {"name": "box", "mass_kg": "1.5", field: value}
    _refused(factory, signed, f"/programs/{world.program_id}",
             f"/programs/{world.program_id}/products", data, field)


@pytest.mark.parametrize("field, value", [
    *[("duration_s", v) for v in BAD_NUMBERS], ("duration_s", "0"), ("duration_s", ""),
    ("occurrences", "2.5"), ("occurrences", "0"), ("occurrences", str(2**40)),
], ids=lambda v: repr(v)[:20])
def test_phase_form(factory, signed, world, field, value):
    data = {"name": "road", "duration_s": "60", "occurrences": "1", field: value}
    _refused(factory, signed, f"/programs/{world.program_id}",
             f"/programs/{world.program_id}/phases", data, field)


@pytest.mark.parametrize("filename, content, form, needle", [
    ("psd.csv", "20,0.01\n2000,0.01\n# café\n".encode("latin-1"), {}, "UTF-8"),
    ("psd.csv", b"20,0.01,5\n2000,0.01,5\n", {}, "columns"),
    ("psd.csv", b"20,0.01\n2_000,0.01\n", {}, "row 2"),
    ("psd.csv", b"20,0.01\n\x00\n", {}, "NUL"),
    ("psd.json", b'{"freq_hz": ["20", "2000"], "asd_g2_hz": [0.01, 0.01]}', {}, "freq_hz"),
    ("psd.json", b'{"freq_hz": [20, 2000], "asd_g2_hz": [0.01, 0.01], "grms": 3}', {},
     "grms"),
    ("rec.npy", npz_bytes(), {"kind": "time_history", "value_units": "g",
                              "sample_rate_hz": "1000"}, ".npy"),
    ("rec.wav", wav_bytes(truncate=40), {"kind": "time_history", "value_units": "g"},
     "calibration"),
    ("rec.csv", b"t,a\n0,1\n0.001,2\n0.002,3\n",
     {"kind": "time_history", "value_units": "g", "sample_rate_hz": "1000"}, "fs_hz"),
    ("rec.csv", b"1\n2\n3\n", {"kind": "time_history", "value_units": "g",
                               "sample_rate_hz": "nan"}, "sample_rate_hz"),
    ("psd.csv", b"20,0.01\n2000,0.01\n", {"axis": "W"}, "W"),
    ("psd.csv", b"20,0.01\n2000,0.01\n", {"name": "a\nb"}, "name"),
], ids=["latin1", "extra-column", "underscore", "nul", "json-strings", "json-unknown",
        "npz", "wav-no-calibration", "two-columns-rate", "rate-nan", "axis", "name-newline"])
def test_environment_upload(factory, signed, world, filename, content, form, needle):
    data = {"name": unique("env"), "kind": "random", "axis": "Z", "value_units": "g^2/Hz",
            **form}
    _refused(factory, signed, f"/products/{world.product_id}",
             f"/products/{world.product_id}/environments", data, needle,
             files={"file": (filename, content, "text/csv")})


@pytest.mark.parametrize("field, value", [
    *[("applied", v) for v in BAD_NUMBERS], ("allowable", "inf"),
    ("factor_of_safety", "0"), ("factor_of_safety", "nan"), ("units", "M\nPa"),
], ids=lambda v: repr(v)[:20])
def test_analysis_form(factory, signed, req_id, field, value):
    data = {"applied": "100", "allowable": "150", "units": "MPa", field: value}
    _refused(factory, signed, f"/requirements/{req_id}", f"/requirements/{req_id}/analyses",
             data, field)


@pytest.mark.parametrize("day, needle", [
    ("99999-01-01", "expires_on"), ("2001-01-01", "expires_at"), ("tomorrow", "expires_on"),
    ("2999-01-01", "expires_at"),
])
def test_waiver_form(factory, browserless, users, req_id, day, needle):
    b = browserless(users["approver"])
    _refused(factory, b, f"/requirements/{req_id}", f"/requirements/{req_id}/waivers",
             {"rationale": "accepted by the review board", "expires_on": day}, needle)
