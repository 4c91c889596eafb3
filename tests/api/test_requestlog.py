"""Structured request logs (qualplan.api.requestlog): one record per request."""

from __future__ import annotations

import io
import json
import logging

import pytest

from qualplan.api import requestlog
from tests.api.conftest import share


class Collect(logging.Handler):
    def __init__(self) -> None:
        super().__init__()
        self.records: list[logging.LogRecord] = []

    def emit(self, record: logging.LogRecord) -> None:
        self.records.append(record)


@pytest.fixture
def records():
    h = Collect()
    requestlog.LOGGER.addHandler(h)
    yield h.records
    requestlog.LOGGER.removeHandler(h)


def test_each_request_logged_with_id_user_route_status_duration(eng, viewer, records):
    program = eng.post("/programs", {"name": "log test program"}).json()
    share(eng, program["id"])
    r = viewer.get(f"/programs/{program['id']}")
    rec = records[-1]
    assert rec.request_id == r.headers["x-request-id"]
    assert rec.user == viewer.caller.name
    assert rec.method == "GET" and rec.status == 200
    assert rec.route == "/api/v1/programs/{program_id}"  # the route, not the path
    assert rec.duration_ms >= 0
    created = records[-4]  # before it: the two grants of share() (PUT)
    assert [r.method for r in records[-3:-1]] == ["PUT", "PUT"]
    assert created.method == "POST" and created.status == 201
    assert created.user == eng.caller.name


def test_unauthenticated_request_and_incoming_id(client, records):
    r = client.get("/api/v1/programs", headers={"X-Request-ID": "proxy-42"})
    assert r.status_code == 401 and r.headers["x-request-id"] == "proxy-42"
    assert records[-1].request_id == "proxy-42" and records[-1].user is None
    assert records[-1].status == 401
    r = client.get("/api/v1/health", headers={"X-Request-ID": "bad id with spaces"})
    assert r.headers["x-request-id"] != "bad id with spaces"


def test_json_lines_when_not_a_terminal():
    rec = logging.LogRecord("qualplan.request", logging.INFO, __file__, 1, "%s %s", ("GET", "/x"),
                            None)
    for k, v in {"request_id": "r1", "user": "ada", "method": "GET", "route": "/x",
                 "status": 200, "duration_ms": 1.5}.items():
        setattr(rec, k, v)
    line = json.loads(requestlog.JsonLines().format(rec))
    assert line["request_id"] == "r1" and line["status"] == 200 and line["message"] == "GET /x"
    assert line["time"].endswith("Z")
    assert "user=ada" in requestlog.KeyValues().format(rec)
    stream = io.StringIO()  # not a TTY: JSON lines
    logger = logging.getLogger("qualplan.request")
    saved = list(logger.handlers)
    try:
        logger.handlers = []
        requestlog.install_handler(stream)
        requestlog.install_handler(stream)  # once per process
        assert len(logger.handlers) == 1
        assert isinstance(logger.handlers[0].formatter, requestlog.JsonLines)
    finally:
        logger.handlers = saved


def test_metrics_in_prometheus_text_format(viewer, client):
    # reference: prometheus-client's own parser of the text exposition format
    from prometheus_client.parser import text_string_to_metric_families

    viewer.get("/events")
    r = viewer.get("/metrics")
    assert r.headers["content-type"].startswith("text/plain")
    fams = {f.name: f for f in text_string_to_metric_families(r.text)}
    counts = {(s.labels["method"], s.labels["route"], s.labels["status"]): s.value
              for s in fams["qualplan_http_requests"].samples if s.name.endswith("_total")}
    assert counts[("GET", "/api/v1/events", "200")] >= 1
    buckets = [s for s in fams["qualplan_http_request_duration_seconds"].samples
               if s.name.endswith("_count") and s.labels["route"] == "/api/v1/events"]
    assert buckets and buckets[0].value >= 1
    assert client.get("/api/v1/metrics").status_code == 401  # a token, like every route
