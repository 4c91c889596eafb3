"""Prometheus metrics of the API: request counts and latencies per route.

``GET /api/v1/metrics`` answers the Prometheus text exposition format (version 0.0.4)
through prometheus-client; it needs a token like every route but /health (give the
scraper a viewer token). The counters are per process: with ``serve --workers N`` each
process reports its own (scrape each, or sum them in Prometheus).
"""

from __future__ import annotations

from fastapi import APIRouter, Response
from prometheus_client import (
    CONTENT_TYPE_LATEST,
    CollectorRegistry,
    Counter,
    Gauge,
    Histogram,
    generate_latest,
)

from qualplan.api.deps import ReaderDep, SessionDep
from qualplan.planning import jobs

REGISTRY = CollectorRegistry(auto_describe=True)
REQUESTS = Counter("qualplan_http_requests", "HTTP requests served.",
                   ["method", "route", "status"], registry=REGISTRY)
LATENCY = Histogram("qualplan_http_request_duration_seconds",
                    "Time from the request to the end of its response [s].",
                    ["method", "route"], registry=REGISTRY,
                    buckets=(0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0))

JOBS = Gauge("qualplan_jobs", "Jobs in the queue (whole database), by status.", ["status"],
             registry=REGISTRY)
JOB_DURATION = Gauge("qualplan_job_duration_seconds",
                     "Mean run time of the jobs finished in the last hour, by kind [s].",
                     ["kind"], registry=REGISTRY)

router = APIRouter(tags=["service"])


def observe(method: str, route: str, status: int, duration_s: float) -> None:
    """Count one request and its duration (called by the request log middleware)."""
    REQUESTS.labels(method, route, str(status)).inc()
    LATENCY.labels(method, route).observe(duration_s)


@router.get("/metrics", response_class=Response,
            responses={200: {"content": {"text/plain": {}},
                             "description": "Prometheus text format"}})
def metrics(_: ReaderDep, session: SessionDep) -> Response:
    """Request counts (`qualplan_http_requests_total`) and latencies
    (`qualplan_http_request_duration_seconds`) of this process, per method and route; the
    job queue's depth (`qualplan_jobs{status}`) and recent job run times
    (`qualplan_job_duration_seconds{kind}`) from the database."""
    for status, n in jobs.queue_depth(session).items():
        JOBS.labels(status).set(n)
    for kind, seconds in jobs.recent_durations(session).items():
        JOB_DURATION.labels(kind).set(seconds)
    return Response(generate_latest(REGISTRY), media_type=CONTENT_TYPE_LATEST)
