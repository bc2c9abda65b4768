"""Which Host and Origin the server answers: loopback names, and hosts the user names.

A page on another site can make the browser send requests to
``127.0.0.1:PORT``; with DNS rebinding it can even read the answers, under a
name of its own that resolves to 127.0.0.1.  Two checks stop that:

* **Host.**  Only ``127.0.0.1``, ``localhost`` and ``[::1]`` (any port) and
  the hosts given to ``ringwise serve --allow-host`` are served; any other
  ``Host`` header (a rebound name) is answered 400, in the API's one error
  shape.  Starlette's :class:`~starlette.middleware.trustedhost.TrustedHostMiddleware`
  does the matching (its patterns, ``*.example.org`` included).
* **Origin.**  A request that can change state or start work (any method but
  GET, HEAD and OPTIONS) that carries an ``Origin`` header naming another
  host (or ``null``, as sandboxed frames send) is answered 403.  Requests
  without one (curl, scripts, the CLI) are not browsers' cross-site requests
  and pass.

Neither answer repeats the Host or the Origin it refused; no answer of the
app is built from the Host header (the share link is built in the browser
from the page's own origin).
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Final
from urllib.parse import urlsplit

from starlette._utils import parse_host_header
from starlette.datastructures import Headers
from starlette.middleware.trustedhost import TrustedHostMiddleware
from starlette.responses import JSONResponse
from starlette.types import ASGIApp, Receive, Scope, Send

from ringwise.web import errors

#: Loopback names the server always answers to (IPv6 in its bracketed Host form).
LOOPBACK_HOSTS: Final = ("127.0.0.1", "localhost", "[::1]")
#: Methods that only read: no Origin check.
SAFE_METHODS: Final = frozenset({"GET", "HEAD", "OPTIONS"})
BAD_HOST: Final = (
    "this server answers only to 127.0.0.1, localhost and [::1] and the hosts named "
    "with ringwise serve --allow-host"
)
BAD_ORIGIN: Final = "requests that change state or start work are refused from other sites"


def allowed_hosts(extra: Iterable[str] = ()) -> list[str]:
    """The loopback names and ``extra`` (IPv6 addresses bracketed, as in a Host header)."""
    hosts = list(LOOPBACK_HOSTS)
    for host in extra:
        host = host.strip().lower()
        if ":" in host and not host.startswith("["):
            host = f"[{host}]"
        if host and host not in hosts:
            hosts.append(host)
    return hosts


class HostGuard(TrustedHostMiddleware):
    """Host and Origin checks (module doc); refusals in the API's error shape."""

    def __init__(self, app: ASGIApp, hosts: Iterable[str] = ()) -> None:
        super().__init__(app, allowed_hosts=allowed_hosts(hosts), www_redirect=False)

    def allows(self, host_header: str | None) -> bool:
        parsed = parse_host_header(host_header)
        if parsed is None:
            return False
        host = parsed.host.lower()
        return any(
            host == p or (p.startswith("*.") and host.endswith(p[1:])) for p in self.allowed_hosts
        )

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] not in ("http", "websocket"):
            await self.app(scope, receive, send)
            return
        headers = Headers(scope=scope)
        if not self.allows(headers.get("host")):
            await _refuse(400, "host", BAD_HOST, "untrusted_host", scope, receive, send)
            return
        origin = headers.get("origin")
        if scope.get("method", "GET") not in SAFE_METHODS and origin is not None:
            netloc = urlsplit(origin).netloc if origin != "null" else ""
            if not self.allows(netloc or None):
                await _refuse(403, "origin", BAD_ORIGIN, "foreign_origin", scope, receive, send)
                return
        await self.app(scope, receive, send)


async def _refuse(
    status: int, field: str, message: str, kind: str, scope: Scope, receive: Receive, send: Send
) -> None:
    body = errors.error_body(status, f"{field}: {message}", [errors.problem(field, message, kind)])
    await JSONResponse(body, status_code=status)(scope, receive, send)
