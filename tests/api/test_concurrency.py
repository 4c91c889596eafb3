"""Two engineers editing one requirement: one wins, the other gets 412 (or 409 when the
database itself refuses the concurrent write), and no update is silently lost."""

from __future__ import annotations

import threading

from sqlalchemy import func, select

from qualplan.store import models as m
from tests.api.conftest import Api


def _requirement(eng: Api, world: dict, key: str) -> dict:
    return eng.post("/requirements", {
        "program_id": world["program"]["id"], "key": key, "text": "original",
        "product_id": world["unit"]["id"], "method": "analysis"}).json()


def _updates(factory, requirement_id: int) -> int:
    with factory() as session:
        return session.scalar(select(func.count()).select_from(m.Event).where(
            m.Event.entity == "requirement", m.Event.entity_id == requirement_id,
            m.Event.action == "update"))


def test_second_edit_from_the_same_version_is_refused(client, callers, world, factory):
    alice, bob = Api(client, callers["engineer"]), Api(client, callers["admin"])
    req = _requirement(alice, world, "CON-1")
    path = f"/requirements/{req['id']}"
    tag_a, tag_b = alice.get(path).headers["ETag"], bob.get(path).headers["ETag"]
    assert tag_a == tag_b == '"1"'
    alice.patch(path, {"text": "alice's text"}, headers={"If-Match": tag_a})
    r = bob.patch(path, {"acceptance_criterion": "MS >= 0"}, headers={"If-Match": tag_b},
                  expect=412)
    assert r.json()["expected_version"] == 1 and r.json()["current_version"] == 2
    # bob reloads and applies his change again: both changes are kept
    fresh = bob.get(path)
    bob.patch(path, {"acceptance_criterion": "MS >= 0"},
              headers={"If-Match": fresh.headers["ETag"]})
    final = alice.get(path).json()
    assert final["text"] == "alice's text" and final["acceptance_criterion"] == "MS >= 0"
    assert final["version"] == 3 and _updates(factory, req["id"]) == 2


def test_racing_edits_exactly_one_wins(client, callers, world, factory):
    eng = Api(client, callers["engineer"])
    req = _requirement(eng, world, "CON-2")
    path = f"/requirements/{req['id']}"
    n = 6
    barrier = threading.Barrier(n)
    results: dict[int, tuple[int, dict]] = {}

    def edit(i: int) -> None:
        barrier.wait()
        r = eng.request("PATCH", path, json={"text": f"edit {i}"}, headers={"If-Match": '"1"'})
        results[i] = (r.status_code, r.json())

    threads = [threading.Thread(target=edit, args=(i,)) for i in range(n)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=60)
    codes = sorted(code for code, _ in results.values())
    assert len(codes) == n and codes.count(200) == 1, results
    assert set(codes) - {200} <= {409, 412}, results
    (winner,) = [i for i, (code, _) in results.items() if code == 200]
    final = eng.get(path).json()
    assert final["text"] == f"edit {winner}" and final["version"] == 2
    assert _updates(factory, req["id"]) == 1
    for code, body in results.values():
        if code != 200:
            assert body["type"].startswith("urn:qualplan:problem:")
