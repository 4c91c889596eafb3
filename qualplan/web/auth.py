"""The browser session: a signed cookie, CSRF tokens, and the Actor behind them.

The cookie holds ``{"n": nonce, "t": sha256 of the API token or null, "e": expiry}``
as base64 JSON with an HMAC-SHA256 signature (the token itself never leaves the
sign-in request). Every request looks the token hash up again, so a revoked token or
a deactivated user is signed out at once. The CSRF token of a form is
HMAC(secret, "csrf:" + nonce): a page of another site can neither read it nor forge it.
The nonce changes at sign-in and sign-out (no session fixation).
"""

from __future__ import annotations

import base64
import hashlib
import hmac
import json
import os
import secrets
import time
from dataclasses import dataclass

from sqlalchemy.orm import Session

from qualplan.planning import access
from qualplan.planning.access import Actor
from qualplan.planning.errors import NotAuthenticated

COOKIE = "qp_session"
#: Session lifetime [s]: a working day.
MAX_AGE_S = 12 * 3600
SECRET_ENV = "QUALPLAN_WEB_SECRET"


def secret_from_settings(settings) -> bytes:
    """The signing secret: ``Settings.web_secret`` (``QUALPLAN_WEB_SECRET``), else random.

    A random secret signs everybody out when the service restarts and does not work
    with several worker processes; set the variable in a deployment.
    """
    value = getattr(settings, "web_secret", None) or os.environ.get(SECRET_ENV)
    return value.encode() if value else secrets.token_bytes(32)


@dataclass(frozen=True)
class WebSession:
    nonce: str
    token_hash: str | None
    expires: int

    @classmethod
    def new(cls, token_hash: str | None = None) -> WebSession:
        return cls(secrets.token_urlsafe(18), token_hash, int(time.time()) + MAX_AGE_S)


class Signer:
    def __init__(self, secret: bytes) -> None:
        self._key = hashlib.sha256(b"qualplan-web-cookie:" + secret).digest()

    def _mac(self, data: bytes) -> str:
        digest = hmac.new(self._key, data, hashlib.sha256).digest()
        return base64.urlsafe_b64encode(digest).decode().rstrip("=")

    def dump(self, ws: WebSession) -> str:
        body = json.dumps({"n": ws.nonce, "t": ws.token_hash, "e": ws.expires}).encode()
        payload = base64.urlsafe_b64encode(body).decode().rstrip("=")
        return f"{payload}.{self._mac(payload.encode())}"

    def load(self, value: str | None) -> WebSession | None:
        """The session in a cookie value; None when missing, forged or expired."""
        if not value or value.count(".") != 1:
            return None
        payload, mac = value.split(".")
        if not hmac.compare_digest(mac, self._mac(payload.encode())):
            return None
        try:
            raw = json.loads(base64.urlsafe_b64decode(payload + "=" * (-len(payload) % 4)))
            ws = WebSession(str(raw["n"]), raw["t"], int(raw["e"]))
        except (ValueError, KeyError, TypeError):
            return None
        if ws.expires < time.time():
            return None
        return ws

    def csrf(self, ws: WebSession) -> str:
        return self._mac(b"csrf:" + ws.nonce.encode())

    def csrf_ok(self, ws: WebSession, token: str | None) -> bool:
        return bool(token) and hmac.compare_digest(str(token), self.csrf(ws))


def actor_of(session: Session, ws: WebSession | None) -> Actor | None:
    """The Actor behind a session cookie (None when signed out, revoked or inactive)."""
    if ws is None or not ws.token_hash:
        return None
    try:
        return access.authenticate_hash(session, ws.token_hash)
    except NotAuthenticated:
        return None


def sign_in(session: Session, token: str) -> tuple[Actor, WebSession]:
    """Check `token` with planning.access.authenticate; a fresh session holding its hash."""
    actor = access.authenticate(session, token.strip())
    return actor, WebSession.new(access.hash_token(token.strip()))
