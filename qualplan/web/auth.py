"""The browser session: a signed cookie naming a server-side sign-in, CSRF tokens, and
the Actor behind them.

The cookie holds ``{"n": nonce, "k": sign-in key or null}`` signed with a timestamp by
itsdangerous (``URLSafeTimedSerializer``, the signing Starlette's sessions use); a cookie
older than the sign-in lifetime, or with a wrong signature, is refused. The sign-in key is
random; only its SHA-256 is stored (table ``sign_ins``), with its user, the API token it
was opened with and its end. Every request looks the sign-in up again: sign-out, revoking
the token and deactivating the user end it at once, so a copied cookie is refused after
any of them. The API token itself never leaves the sign-in request.

The CSRF token of a form is the itsdangerous signature of the nonce (salt
``qualplan-csrf``): a page of another site can neither read it nor forge it. The nonce
changes at sign-in and sign-out (no session fixation).
"""

from __future__ import annotations

import os
import secrets
from dataclasses import dataclass

import itsdangerous
from sqlalchemy.orm import Session

from qualplan.planning import access
from qualplan.planning.access import Actor
from qualplan.planning.errors import NotAuthenticated

COOKIE = "qp_session"
#: Session lifetime [s]: a working day (the server-side sign-in ends at the same age).
MAX_AGE_S = access.SIGN_IN_MAX_AGE_S
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
    """What the cookie carries: a nonce (for CSRF) and the key of a sign-in, or None."""

    nonce: str
    key: str | None = None

    @classmethod
    def new(cls, key: str | None = None) -> WebSession:
        return cls(secrets.token_urlsafe(18), key)


class Signer:
    """Signs and checks the cookie and the CSRF tokens (itsdangerous)."""

    def __init__(self, secret: bytes, max_age_s: int = MAX_AGE_S) -> None:
        self._cookie = itsdangerous.URLSafeTimedSerializer(secret, salt="qualplan-web-cookie")
        self._csrf = itsdangerous.Signer(secret, salt="qualplan-csrf")
        self.max_age_s = max_age_s

    def dump(self, ws: WebSession) -> str:
        return self._cookie.dumps({"n": ws.nonce, "k": ws.key})

    def load(self, value: str | None) -> WebSession | None:
        """The session in a cookie value; None when missing, forged or older than max age."""
        if not value:
            return None
        try:
            raw = self._cookie.loads(value, max_age=self.max_age_s)
            nonce, key = raw["n"], raw["k"]
        except (itsdangerous.BadData, KeyError, TypeError):
            return None
        if not isinstance(nonce, str) or not (key is None or isinstance(key, str)):
            return None
        return WebSession(nonce, key)

    def csrf(self, ws: WebSession) -> str:
        return self._csrf.get_signature(ws.nonce).decode()

    def csrf_ok(self, ws: WebSession, token: str | None) -> bool:
        if not token:
            return False
        try:
            return self._csrf.verify_signature(ws.nonce, str(token))
        except (itsdangerous.BadData, UnicodeError):
            return False


def actor_of(session: Session, ws: WebSession | None) -> Actor | None:
    """The Actor behind a session cookie (None when signed out, ended, revoked, inactive)."""
    if ws is None or not ws.key:
        return None
    try:
        return access.actor_of_sign_in(session, ws.key)
    except NotAuthenticated:
        return None


def sign_in(session: Session, token: str) -> tuple[Actor, WebSession]:
    """Check `token`, open a server-side sign-in; a fresh session holding its key."""
    actor, key = access.open_sign_in(session, token)
    return actor, WebSession.new(key)


def sign_out(session: Session, ws: WebSession | None) -> WebSession:
    """End the sign-in of `ws` on the server; a fresh, signed-out session."""
    if ws is not None and ws.key:
        access.close_sign_in(session, ws.key)
    return WebSession.new()
