"""The locust users of benchmarks/bench_api_locust.py (not run on its own).

Each user makes 80 % reads and 20 % writes with no think time, on the rows that
bench_api_locust.py seeded (their ids in the JSON file named by QUALPLAN_BENCH_DEMO).
Reads: the mix of benchmarks/bench_api.py's readers (requirement pages, a requirement,
an environment, its revisions, the programs, health). Writes: a requirement
edit (If-Match, each user on requirements of its own, so no edit races another), an
inspection evidence, an environment revision (each user on an environment of its own).
"""

from __future__ import annotations

import itertools
import json
import os
import random

from locust import constant, events, task
from locust.contrib.fasthttp import FastHttpUser

DEMO = json.loads(open(os.environ["QUALPLAN_BENCH_DEMO"]).read())  # noqa: SIM115
API = "/api/v1"
_INDEX = itertools.count()
PSD = {"freq_hz": [20.0, 80.0, 500.0, 2000.0], "asd_g2_hz": [0.01, 0.04, 0.04, 0.01]}


class Engineer(FastHttpUser):
    wait_time = constant(0)  # closed loop: the next request as soon as one is answered

    def on_start(self) -> None:
        self.index = next(_INDEX)
        self.rnd = random.Random(self.index)
        self.read_headers = {"Authorization": f"Bearer {DEMO['reader']}"}
        self.write_headers = {"Authorization": f"Bearer {DEMO['writer']}"}
        n_users = int(os.environ.get("QUALPLAN_BENCH_USERS", "50"))
        self.mine = DEMO["requirements"][self.index % n_users::n_users]
        self.env = DEMO["environments"][self.index % len(DEMO["environments"])]
        self.step = 0

    def _get(self, path: str, name: str) -> None:
        self.client.get(API + path, headers=self.read_headers, name=f"read: {name}")

    @task
    def one(self) -> None:
        """80 % a read (the mix of benchmarks/bench_api.py's readers), 20 % a write."""
        if self.rnd.random() < 0.8:
            self.read()
        else:
            self.write()

    def read(self) -> None:
        r = self.rnd
        kind = r.choices(["page", "requirement", "environment", "revisions", "programs",
                          "health"], [3, 4, 2, 2, 1, 1])[0]
        if kind == "page":
            self._get(f"/requirements?program_id={DEMO['program']}"
                      f"&offset={r.randrange(0, 150)}&limit=50", "requirements page")
        elif kind == "requirement":
            self._get(f"/requirements/{r.choice(DEMO['requirements'])}", "requirement")
        elif kind == "environment":
            self._get(f"/environments/{r.choice(DEMO['environments'])}", "environment")
        elif kind == "revisions":
            self._get(f"/environments/{r.choice(DEMO['environments'])}/revisions",
                      "revisions")
        elif kind == "programs":
            self._get("/programs", "programs")
        else:
            self._get("/health", "health")

    def write(self) -> None:
        self.step += 1
        action = self.step % 3
        req_id = self.rnd.choice(self.mine)
        if action == 0:
            got = self.client.get(f"{API}/requirements/{req_id}", headers=self.write_headers,
                                  name="write: read before edit")
            self.client.patch(f"{API}/requirements/{req_id}",
                              json={"acceptance_criterion": f"edit {self.index}-{self.step}"},
                              headers={**self.write_headers,
                                       "If-Match": got.headers.get("ETag") or ""},
                              name="write: requirement edit")
        elif action == 1:
            self.client.post(f"{API}/requirements/{req_id}/evidence/inspection",
                             json={"passed": True, "note": f"inspection {self.step}"},
                             headers=self.write_headers, name="write: inspection evidence")
        else:
            data = {**PSD, "asd_g2_hz": [0.01 + 1e-6 * self.step, 0.04, 0.04, 0.01]}
            self.client.post(f"{API}/environments/{self.env}/revisions",
                             json={"data": data, "note": "bench"},
                             headers=self.write_headers, name="write: environment revision")


# --- every response time, for the driver's read and write percentiles ---------------------

_TIMES: list[tuple[str, float, bool]] = []


@events.request.add_listener
def _record(request_type, name, response_time, response_length, exception=None, **kw):
    _TIMES.append((name, response_time, exception is None, "" if exception is None
                   else str(exception)[:200]))


@events.quitting.add_listener
def _dump(environment, **kw):
    with open(os.environ["QUALPLAN_BENCH_TIMES"], "w") as out:
        json.dump(_TIMES, out)
