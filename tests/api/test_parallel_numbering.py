"""Parallel requests numbering one environment's revisions and one product's levels:
all succeed, numbered without a gap or a duplicate (SQLite: writers take turns in the
server; PostgreSQL: the environment's or the product's row lock)."""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

from tests.api.conftest import GEVS_ACC

N = 20


def _parallel(fn) -> list:
    start = threading.Barrier(N)

    def run(i):
        start.wait(timeout=60)
        return fn(i)

    with ThreadPoolExecutor(max_workers=N) as pool:
        return list(pool.map(run, range(N)))


def test_twenty_parallel_revisions_of_one_environment(eng, world):
    env_id = world["env"]["id"]

    def revise(i):
        # each thread's PSD differs (invented levels, 0.001 g^2/Hz apart)
        data = {**GEVS_ACC, "asd_g2_hz": [0.014 + 0.001 * i, 0.08, 0.08, 0.013]}
        r = eng.post(f"/environments/{env_id}/revisions", {"data": data}, expect=None)
        return r.status_code, r.json().get("number")

    answers = _parallel(revise)
    assert [code for code, _ in answers] == [201] * N, answers
    assert sorted(n for _, n in answers) == list(range(2, N + 2))
    history = eng.get(f"/environments/{env_id}/revisions", params={"limit": 500}).json()
    assert sorted(r["number"] for r in history["items"]) == list(range(1, N + 2))


def test_twenty_parallel_derivations_of_one_level(eng, world):
    rev_id = eng.get(f"/environments/{world['env']['id']}/revisions").json()["items"][0]["id"]
    recipe = {"product_id": world["unit"]["id"], "name": "random Z", "grade": "qualification",
              "kind": "random", "axis": "Z", "revision_ids": [rev_id],
              "policy_id": world["policy"]["id"]}

    def derive(_i):
        r = eng.post("/levels", recipe, expect=None)
        return r.status_code, r.json().get("number")

    answers = _parallel(derive)
    assert [code for code, _ in answers] == [201] * N, answers
    assert sorted(n for _, n in answers) == list(range(1, N + 1))
