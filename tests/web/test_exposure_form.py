"""The environment form's exposure fields (share of the phase, duration per occurrence,
shocks per occurrence): stored with the data and counted by the life cycle, or refused
with the field named and nothing stored (docs/methods/exposure.md; life from phase
durations after MIL-STD-810H Part One Annex A)."""

from __future__ import annotations

from tests.web.test_pages import WORKMANSHIP_CSV, upload


def test_share_from_the_form(browserless, users, world):
    b = browserless(users["engineer"])
    r = upload(b, world, name="cruise Z", share="0.25")
    assert r.status_code == 200 and "/environments/" in str(r.url)
    env_id = int(str(r.url).rstrip("/").split("/")[-1])
    # a second environment filling the phase: 0.25 + 1 = 1.25 times (hand sum), shown
    r = upload(b, world, name="cruise Z again")
    assert "together fill 1.25 times the phase" in r.text
    page = b.get(f"/environments/{env_id}").text
    assert "together fill 1.25 times the phase" in page
    assert 'name="share"' in page  # the revision form asks it too


def test_bad_share_is_refused_and_stores_nothing(browserless, users, world):
    b = browserless(users["engineer"])
    before = b.get(f"/products/{world.product_id}").text.count("/environments/")
    r = upload(b, world, content=WORKMANSHIP_CSV, name="too much", share="1.5")
    assert "data.share" in r.text and "1.5" in r.text
    r = upload(b, world, name="too much", share="a lot")
    assert "share" in r.text and "a lot" in r.text
    after = b.get(f"/products/{world.product_id}").text.count("/environments/")
    assert after == before
