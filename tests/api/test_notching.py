"""Response-limit notching of a test level through the API: stored, read back, refused
with problems, accepted by an approver."""

from __future__ import annotations

import math

import pytest


@pytest.fixture
def random_level(eng, world):
    revs = eng.get(f"/environments/{world['env']['id']}/revisions").json()["items"]
    return eng.post("/levels", {
        "product_id": world["unit"]["id"], "name": "qual random Z", "kind": "random",
        "axis": "Z", "revision_ids": [revs[-1]["id"]],
        "policy_id": world["policy"]["id"]}).json()


def test_notching_story(eng, viewer, approver, random_level):
    lid = random_level["id"]
    viewer.get(f"/levels/{lid}/notching", expect=404)
    # a flat transmissibility of 4 (|T|^2 = 16) and a limit of 0.64 g^2/Hz: the plateau
    # (GEVS qualification 0.16 g^2/Hz x 16 = 2.56) is notched by 10 log10(2.56/0.64) = 6.02 dB
    body = {"location": "monitor A1", "limit": 0.64,
            "transmissibility_freq_hz": [20.0, 2000.0], "transmissibility_gain": [4.0, 4.0],
            "transmissibility_source": "analysis", "max_notch_db": 3.0}
    viewer.post(f"/levels/{lid}/notching", body, expect=403)
    out = eng.post(f"/levels/{lid}/notching", body).json()
    plateau = max(random_level["result"]["asd_g2_hz"])
    depth = 10 * math.log10(plateau * 16 / 0.64)  # closed form
    assert max(n["depth_db"] for n in out["notches"]) == pytest.approx(depth, abs=1e-6)
    assert out["needs_acceptance"] and out["accepted_by"] is None
    assert viewer.get(f"/levels/{lid}/notching").json()["id"] == out["id"]
    eng.post(f"/levels/{lid}/notching/acceptance", {"rationale": "ok"}, expect=403)
    acc = approver.post(f"/levels/{lid}/notching/acceptance",
                        {"rationale": "fixture resonance, not the unit's"}).json()
    assert acc["accepted_by"] and acc["id"] > out["id"]
    approver.post(f"/levels/{lid}/notching/acceptance", {"rationale": "again"}, expect=409)


def test_notching_refusals_are_problems(eng, random_level):
    lid = random_level["id"]
    r = eng.post(f"/levels/{lid}/notching", {
        "location": "monitor A1", "limit": 0.64, "transmissibility_freq_hz": [100.0, 2000.0],
        "transmissibility_gain": [4.0, 4.0], "transmissibility_source": "analysis"},
        expect=422)
    assert r.headers["content-type"].startswith("application/problem+json")
    assert "transmissibility_freq_hz" in r.text and "100" in r.text
    r = eng.post(f"/levels/{lid}/notching", {
        "location": "monitor A1", "transmissibility_freq_hz": [20.0, 2000.0],
        "transmissibility_gain": [4.0, 4.0], "transmissibility_source": "guess"}, expect=422)
    assert "transmissibility_source" in r.text
    eng.get(f"/levels/{lid}/notching", expect=404)


def test_notch_depth_limit_comes_from_the_policy_when_not_given(eng, random_level):
    # Without max_notch_db the level's policy rules decide (control.max_notch_db, 10 dB
    # by default: common practice). A 6.02 dB notch (closed form above) stays within it;
    # with the limit of 3 dB given explicitly it needs acceptance.
    lid = random_level["id"]
    body = {"location": "monitor A1", "limit": 0.64,
            "transmissibility_freq_hz": [20.0, 2000.0], "transmissibility_gain": [4.0, 4.0],
            "transmissibility_source": "analysis"}
    out = eng.post(f"/levels/{lid}/notching", body).json()
    assert out["max_notch_db"] == 10.0 and not out["needs_acceptance"]
    out = eng.post(f"/levels/{lid}/notching", {**body, "max_notch_db": 3.0}).json()
    assert out["max_notch_db"] == 3.0 and out["needs_acceptance"]
