"""Who is asking: the session cookie → a user, on every request, before any route runs.

A pure ASGI middleware (so the audit actor set here is seen by the route's thread):

* reads the signed cookie (itsdangerous ``TimestampSigner``, refused after the session
  lifetime) and looks the token up in ``auth_sessions``;
* gives every browser a token even before sign-in: it anchors the CSRF token of the sign-in
  form; signing in always replaces it with a new one (no session fixation);
* refuses anonymous requests to anything but the public paths: a redirect to
  ``/login?next=…`` for pages, 401 for ``/api/…`` (and for htmx, with ``HX-Redirect``);
* in single-user mode every request from a loopback address acts as the built-in local
  admin, and any other address is refused (403).

Each route then declares what it needs with :class:`server.auth.permissions.Require`.
"""

from __future__ import annotations

import hashlib
import hmac
import ipaddress
import json
from dataclasses import dataclass
from http.cookies import SimpleCookie
from typing import Any
from urllib.parse import quote

from anyio import to_thread
from itsdangerous import BadSignature, TimestampSigner
from sqlalchemy.orm import Session, sessionmaker

from server.audit import ACTOR

from .accounts import LOCAL_USER, UserInfo, new_token, session_user
from .ratelimit import LoginLimiter

COOKIE = "panelwright_session"
PUBLIC_PREFIXES = ("/static/",)
PUBLIC_PATHS = frozenset({"/login", "/logout", "/setup", "/favicon.ico"})


def is_public(path: str) -> bool:
    return path in PUBLIC_PATHS or path.startswith(PUBLIC_PREFIXES)


def is_loopback(host: str | None) -> bool:
    if not host:
        return False
    if host in ("testclient", "localhost"):  # Starlette's in-process test client
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


@dataclass
class AuthConfig:
    """What the middleware and the sign-in routes share (``app.state.auth``)."""

    sessions: sessionmaker[Session]
    secret: str
    session_hours: float
    single_user: bool
    cookie_secure: bool
    limiter: LoginLimiter

    def __post_init__(self) -> None:
        self.signer = TimestampSigner(self.secret, salt="panelwright-session")

    def sign(self, token: str) -> str:
        return self.signer.sign(token).decode("ascii")

    def unsign(self, value: str) -> str | None:
        try:
            return self.signer.unsign(value, max_age=int(self.session_hours * 3600)).decode("ascii")
        except (BadSignature, UnicodeError):
            return None

    def csrf_for(self, token: str) -> str:
        return hmac.new(self.secret.encode(), b"csrf:" + token.encode(), hashlib.sha256).hexdigest()

    def cookie_header(self, token: str | None) -> bytes:
        """Set-Cookie for ``token`` (None: delete the cookie).  HttpOnly, SameSite=Lax, path /."""
        if token is None:
            value, extra = "", "; Max-Age=0"
        else:
            value, extra = self.sign(token), f"; Max-Age={int(self.session_hours * 3600)}"
        secure = "; Secure" if self.cookie_secure else ""
        return f"{COOKIE}={value}; Path=/; HttpOnly; SameSite=Lax{extra}{secure}".encode("latin-1")


def _cookie(scope: dict[str, Any]) -> str | None:
    for name, value in scope.get("headers", ()):
        if name == b"cookie":
            jar: SimpleCookie = SimpleCookie()
            try:
                jar.load(value.decode("latin-1"))
            except Exception:  # a malformed header from some other site's cookie: ignore it
                continue
            if COOKIE in jar:
                return jar[COOKIE].value
    return None


def _header(scope: dict[str, Any], name: bytes) -> str | None:
    for k, v in scope.get("headers", ()):
        if k == name:
            return v.decode("latin-1")
    return None


class AuthMiddleware:
    def __init__(self, app: Any, config: AuthConfig) -> None:
        self.app = app
        self.config = config

    async def __call__(self, scope: dict[str, Any], receive: Any, send: Any) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        cfg = self.config
        path: str = scope.get("path", "")
        client = scope.get("client")
        address = client[0] if client else ""
        raw = _cookie(scope)
        token = cfg.unsign(raw) if raw else None
        user: UserInfo | None = None
        if cfg.single_user:
            if not is_loopback(address):
                await _plain(send, 403, "single-user mode serves this machine only")
                return
            user = LOCAL_USER
        elif token is not None and not is_public(path):
            user = await to_thread.run_sync(lambda: session_user(cfg.sessions, token=token))
        fresh: str | None = None
        if token is None:
            token = fresh = new_token()
        state = scope.setdefault("state", {})
        state.update(user=user, session_token=token, csrf_token=cfg.csrf_for(token), client_address=address)

        async def send_with_cookie(message: dict[str, Any]) -> None:
            if fresh is not None and message["type"] == "http.response.start":
                headers = list(message.get("headers", []))
                ours = COOKIE.encode() + b"="
                if not any(k == b"set-cookie" and v.startswith(ours) for k, v in headers):
                    headers.append((b"set-cookie", cfg.cookie_header(fresh)))
                message = {**message, "headers": headers}
            await send(message)

        if user is None and not is_public(path):
            await _refuse_anonymous(scope, send_with_cookie, path)
            return
        reset = ACTOR.set(user.name if user else "anonymous")
        try:
            await self.app(scope, receive, send_with_cookie)
        finally:
            ACTOR.reset(reset)


async def _plain(send: Any, status: int, text: str, headers: list[tuple[bytes, bytes]] | None = None) -> None:
    body = text.encode()
    await send(
        {
            "type": "http.response.start",
            "status": status,
            "headers": [(b"content-type", b"text/plain; charset=utf-8"), (b"content-length", str(len(body)).encode())]
            + (headers or []),
        }
    )
    await send({"type": "http.response.body", "body": body})


def login_url(path: str, query: str = "") -> str:
    target = path + (f"?{query}" if query else "")
    return "/login?next=" + quote(target, safe="")


async def _refuse_anonymous(scope: dict[str, Any], send: Any, path: str) -> None:
    query = scope.get("query_string", b"").decode("latin-1")
    target = login_url(path, query)
    if path.startswith("/api/"):
        body = json.dumps({"detail": "sign in first: this API needs a signed-in session"}).encode()
        await send(
            {
                "type": "http.response.start",
                "status": 401,
                "headers": [
                    (b"content-type", b"application/json"),
                    (b"content-length", str(len(body)).encode()),
                    (b"www-authenticate", b'Cookie realm="panelwright"'),
                ],
            }
        )
        await send({"type": "http.response.body", "body": body})
        return
    if _header(scope, b"hx-request") == "true":
        # htmx would swap a followed redirect into the grid; ask it to load the sign-in page instead.
        await _plain(send, 401, "sign in first", [(b"hx-redirect", target.encode())])
        return
    await send(
        {
            "type": "http.response.start",
            "status": 303,
            "headers": [(b"location", target.encode()), (b"content-length", b"0")],
        }
    )
    await send({"type": "http.response.body", "body": b""})
