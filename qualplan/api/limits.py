"""A limit on the size of request bodies (uploads and JSON alike): 413 beyond it.

The limit is checked on Content-Length before anything is read, and counted on the
stream for chunked bodies, so an oversize request never reaches a use case and
nothing is stored.
"""

from __future__ import annotations

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
                await self._refuse(send, declared)
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
                    await self._refuse(send, received)
                return
            await send(message)

        try:
            await self.app(scope, counted, guarded_send)
        except BodyTooLarge:
            if not refused:
                await self._refuse(send, received)

    async def _refuse(self, send: Send, size: int) -> None:
        body = json.dumps(
            {
                "type": problem_type("too-large"),
                "title": "Content too large",
                "status": 413,
                "detail": f"the request body is larger than the limit of {self.max_bytes} "
                "bytes (QUALPLAN_MAX_UPLOAD_BYTES); nothing was stored",
                "field": "body",
                "value": f"{size} bytes or more",
                "limit_bytes": self.max_bytes,
            }
        ).encode()
        await send(
            {
                "type": "http.response.start",
                "status": 413,
                "headers": [
                    (b"content-type", PROBLEM_JSON.encode()),
                    (b"content-length", str(len(body)).encode()),
                    (b"connection", b"close"),
                ],
            }
        )
        await send({"type": "http.response.body", "body": body})
