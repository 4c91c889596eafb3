"""A limit on the size of request bodies (uploads and JSON alike): 413 beyond it.

The limit is checked on Content-Length before anything is read, and counted on the
stream for chunked bodies, so an oversize request never reaches a use case and
nothing is stored. The upload routes that take long records (``record_paths``) have
the larger record limit here; the route itself then holds a file that is not a record
to the ordinary limit (:func:`refuse_unless_record`).
"""

from __future__ import annotations

import html
import json
import re

from starlette.types import ASGIApp, Message, Receive, Scope, Send

from qualplan.api.errors import PROBLEM_JSON, problem_type


class BodyTooLarge(Exception):
    pass


#: The upload routes (API and web) through which a long record may be sent.
RECORD_PATHS = re.compile(
    r"^(/api/v1/environments/upload|/api/v1/environments/\d+/revisions/upload"
    r"|/products/\d+/environments|/environments/\d+/revisions)$")


class BodySizeLimit:
    def __init__(self, app: ASGIApp, max_bytes: int, record_max_bytes: int | None = None,
                 record_paths: re.Pattern = RECORD_PATHS) -> None:
        self.app, self.general_max_bytes = app, max_bytes
        self.record_max_bytes = max(max_bytes, record_max_bytes or max_bytes)
        self.record_paths = record_paths

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        record_route = (scope.get("method") == "POST"
                        and self.record_paths.match(scope.get("path", "")) is not None)
        limit = self.record_max_bytes if record_route else self.general_max_bytes
        await _Limited(self.app, limit, "QUALPLAN_MAX_RECORD_UPLOAD_BYTES" if record_route
                       else "QUALPLAN_MAX_UPLOAD_BYTES")(scope, receive, send)


def too_large_detail(limit: int, setting: str) -> str:
    return (f"the request body is larger than the limit of {limit} bytes ({setting}); "
            "nothing was stored")


class _Limited:
    def __init__(self, app: ASGIApp, max_bytes: int, setting: str) -> None:
        self.app, self.max_bytes, self.setting = app, max_bytes, setting

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        headers = dict(scope.get("headers") or [])
        length = headers.get(b"content-length")
        if length is not None:
            try:
                declared = int(length)
            except ValueError:
                declared = 0
            if declared > self.max_bytes:
                await self._refuse(send, declared, scope)
                return
        received = 0
        exceeded = False
        refused = False

        async def counted() -> Message:
            nonlocal received, exceeded
            message = await receive()
            if message["type"] == "http.request":
                received += len(message.get("body", b""))
                if received > self.max_bytes:
                    exceeded = True
                    raise BodyTooLarge
            return message

        async def guarded_send(message: Message) -> None:
            # The app may turn the aborted read into its own error (FastAPI answers 400
            # for a body it could not read): answer 413 instead, once.
            nonlocal refused
            if exceeded:
                if not refused:
                    refused = True
                    await self._refuse(send, received, scope)
                return
            await send(message)

        try:
            await self.app(scope, counted, guarded_send)
        except BodyTooLarge:
            if not refused:
                await self._refuse(send, received, scope)

    async def _refuse(self, send: Send, size: int, scope: Scope) -> None:
        detail = too_large_detail(self.max_bytes, self.setting)
        headers = dict(scope.get("headers") or [])
        if not scope.get("path", "").startswith("/api/") and \
                b"text/html" in headers.get(b"accept", b""):
            await self._send(send, "text/html; charset=utf-8", _page(detail))
            return
        body = json.dumps(
            {
                "type": problem_type("too-large"),
                "title": "Content too large",
                "status": 413,
                "detail": detail,
                "field": "body",
                "value": f"{size} bytes or more",
                "limit_bytes": self.max_bytes,
            }
        ).encode()
        await self._send(send, PROBLEM_JSON, body)

    @staticmethod
    async def _send(send: Send, content_type: str, body: bytes) -> None:
        await send(
            {
                "type": "http.response.start",
                "status": 413,
                "headers": [
                    (b"content-type", content_type.encode()),
                    (b"content-length", str(len(body)).encode()),
                    (b"connection", b"close"),
                ],
            }
        )
        await send({"type": "http.response.body", "body": body})


def _page(detail: str) -> bytes:
    """A plain page for a browser's form post (the web pages' own look is not needed)."""
    return (
        "<!doctype html><html lang=\"en\"><head><meta charset=\"utf-8\">"
        "<title>File too large - qualplan</title></head><body style=\"font-family:sans-serif;"
        "max-width:40em;margin:2em auto\"><h1>File too large</h1>"
        f"<p role=\"alert\">Not saved: {html.escape(detail)}.</p>"
        "<p>Go back to the form and choose a smaller file.</p></body></html>"
    ).encode()
