"""Structured request logs: request id, user, route, status and duration of every request.

One record per request on the ``qualplan.request`` logger (stdlib logging), with the
fields as attributes (``request_id``, ``user``, ``method``, ``route``, ``status``,
``duration_ms``). The response carries the id in ``X-Request-ID`` (a sane incoming
``X-Request-ID`` is kept, so a proxy's id follows the request). :func:`install_handler`
writes the records to stderr: one JSON object per line when stderr is not a terminal
(for a log collector), ``key=value`` text on a terminal.
"""

from __future__ import annotations

import json
import logging
import re
import sys
import time
import uuid

from starlette.types import ASGIApp, Message, Receive, Scope, Send

from qualplan.api import metrics

LOGGER = logging.getLogger("qualplan.request")
FIELDS = ("request_id", "user", "method", "route", "status", "duration_ms")
_SANE_ID = re.compile(r"^[A-Za-z0-9._-]{1,64}$")


class RequestLog:
    """ASGI middleware logging each HTTP request once, when its response has started."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        incoming = dict(scope.get("headers") or []).get(b"x-request-id", b"").decode(
            "latin-1")
        rid = incoming if _SANE_ID.match(incoming) else uuid.uuid4().hex
        scope.setdefault("state", {})["request_id"] = rid
        start = time.perf_counter()
        status = 500

        async def send_with_id(message: Message) -> None:
            nonlocal status
            if message["type"] == "http.response.start":
                status = int(message["status"])
                message = dict(message)
                message["headers"] = [*message.get("headers", []),
                                      (b"x-request-id", rid.encode())]
            await send(message)

        try:
            await self.app(scope, receive, send_with_id)
        finally:
            route = scope.get("route")
            state = scope.get("state") or {}
            template = _template(getattr(route, "path", None), scope.get("path", ""))
            duration = time.perf_counter() - start
            if route is not None:  # unmatched paths would make one series each
                metrics.observe(scope.get("method", ""), template, status, duration)
            LOGGER.info(
                "%s %s %s", scope.get("method"), scope.get("path"), status,
                extra={
                    "request_id": rid,
                    "user": state.get("user"),
                    "method": scope.get("method"),
                    "route": template,
                    "status": status,
                    "duration_ms": round(duration * 1000.0, 3),
                })


def _template(tmpl: str | None, path: str) -> str:
    """The matched route's path template with the prefix it was included under."""
    if not tmpl:
        return path
    head = tmpl.split("{")[0]
    i = path.find(head)
    return path[:i] + tmpl if i > 0 else tmpl


class JsonLines(logging.Formatter):
    """One JSON object per record: time (UTC, ISO 8601), level, message and the fields."""

    def format(self, record: logging.LogRecord) -> str:
        out = {"time": time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(record.created))
               + f".{int(record.msecs):03d}Z", "level": record.levelname,
               "logger": record.name, "message": record.getMessage()}
        for key in FIELDS:
            if hasattr(record, key):
                out[key] = getattr(record, key)
        return json.dumps(out, separators=(",", ":"))


class KeyValues(logging.Formatter):
    """``time level message key=value ...`` for a terminal."""

    def format(self, record: logging.LogRecord) -> str:
        pairs = " ".join(f"{k}={getattr(record, k)}" for k in FIELDS if hasattr(record, k))
        return f"{self.formatTime(record)} {record.levelname} {record.getMessage()} {pairs}"


def install_handler(stream=None) -> None:
    """Send request records to `stream` (default stderr) once per process."""
    if any(getattr(h, "_qualplan", False) for h in LOGGER.handlers):
        return
    stream = stream or sys.stderr
    handler = logging.StreamHandler(stream)
    handler.setFormatter(KeyValues() if getattr(stream, "isatty", lambda: False)()
                         else JsonLines())
    handler._qualplan = True  # type: ignore[attr-defined]
    LOGGER.addHandler(handler)
    LOGGER.setLevel(logging.INFO)
    LOGGER.propagate = False
