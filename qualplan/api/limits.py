"""A limit on the size of request bodies (uploads and JSON alike): 413 beyond it.

The limit is checked on Content-Length before anything is read, and counted on the
stream for chunked bodies, so an oversize request never reaches a use case and
nothing is stored.
"""

from __future__ import annotations

import html
import json

from starlette.types import ASGIApp, Message, Receive, Scope, Send

from qualplan.api.errors import PROBLEM_JSON, problem_type


class BodyTooLarge(Exception):
    pass


class BodySizeLimit:
    def __init__(self, app: ASGIApp, max_bytes: int) -> None:
        self.app, self.max_bytes = app, max_bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
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
        detail = (f"the request body is larger than the limit of {self.max_bytes} bytes "
                  "(QUALPLAN_MAX_UPLOAD_BYTES); nothing was stored")
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
