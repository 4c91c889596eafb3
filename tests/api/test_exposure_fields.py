"""The exposure of an uploaded environment (its share of the phase, its own duration, a
shock's events per occurrence) given as form fields beside the file, stored with the data
and used by the life cycle; refused with the field named where it is out of range, given
twice, or given for a long record that the life cycle does not count (rule of
docs/methods/exposure.md, after MIL-STD-810H Part One Annex A: life from phase durations)."""

from __future__ import annotations

import pytest

from tests.api.conftest import unique
from tests.api.test_bad_input import CSV_OK, _counts


def _up(eng, world, content=CSV_OK, expect=201, kind="random", name=None, **form):
    data = {"product_id": str(world["unit"]["id"]), "phase_id": str(world["phase"]["id"]),
            "name": name or unique("up"), "kind": kind, "axis": "Z",
            "value_units": "g^2/Hz" if kind == "random" else "g", **form}
    return eng.post("/environments/upload", files={"file": ("data.csv", content, "text/csv")},
                    data=data, expect=expect)


def test_share_beside_the_file_is_stored_and_counted(eng, world):
    # the world's phase 'launch' lasts 120 s; its random environment fills it (share 1)
    env = _up(eng, world, share="0.25").json()
    rev = eng.get(f"/environments/{env['id']}/revisions").json()["items"][0]
    assert rev["spec"]["share"] == 0.25
    # 1 + 0.25 = 1.25 times the phase's time (hand sum), named where the environment is read
    warnings = eng.get(f"/environments/{env['id']}").json()["warnings"]
    assert any("together fill 1.25 times the phase's time" in w for w in warnings), warnings
    # a record repeated to fill 30 s of the 120 s phase: share 0.25 (30/120)
    record = b"time_s,accel_g\n" + b"".join(
        f"{k / 1000:.3f},{(-1) ** k * 0.5}\n".encode() for k in range(200))
    env2 = _up(eng, world, record, kind="time_history", duration_s="30").json()
    rev2 = eng.get(f"/environments/{env2['id']}/revisions").json()["items"][0]
    assert rev2["spec"]["duration_s"] == 30.0
    warnings = eng.get(f"/environments/{env2['id']}").json()["warnings"]
    assert any("together fill 1.5 times the phase's time" in w for w in warnings), warnings


@pytest.mark.parametrize("form, field, value", [
    ({"share": "1.5"}, "data.share", 1.5),
    ({"share": "0"}, "data.share", 0.0),
    ({"duration_s": "-3"}, "data.duration_s", -3.0),
    ({"count": "2"}, "data.count", 2),           # a spectrum counts no events
    ({"share": "nan"}, "share", "nan"),
    ({"share": "0.5", "channel_axes": "X", "kind": "time_history"}, "share", 0.5),
])
def test_bad_exposure_is_refused_and_stores_nothing(eng, world, factory, form, field, value):
    before = _counts(factory)
    kind = form.pop("kind", "random")
    body = _up(eng, world, expect=422, kind=kind, **form).json()
    assert body["field"] == field, body
    if field.startswith("data."):
        assert body["value"] == value
    assert _counts(factory) == before


def test_exposure_in_the_file_and_beside_it_must_agree(eng, world, factory):
    before = _counts(factory)
    body = eng.post("/environments/upload", files={"file": (
        "psd.json", b'{"freq_hz": [20, 2000], "asd_g2_hz": [0.01, 0.01], "share": 0.5}',
        "application/json")}, data={
        "product_id": str(world["unit"]["id"]), "phase_id": str(world["phase"]["id"]),
        "name": unique("up"), "kind": "random", "axis": "Z", "share": "0.25"},
        expect=422).json()
    assert body["field"] == "share" and body["value"] == 0.25
    assert "0.5" in body["detail"]
    assert _counts(factory) == before
