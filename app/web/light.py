"""Admission for the light computations the server does in its own process.

The sheet's answers (analysis, the sheet's view, the what-if sweep, the steady
state, snapping, a threshold) are computed in the server's thread pool, under
one interpreter lock.  With many more requests than cores, each one added
only lengthens the queue, and the event loop itself (which answers refusals,
job polls and files) waits its turn for the lock.  So at most
:data:`LIGHT_LIMIT` of them run at once; one more is answered 503 with
``Retry-After`` at once, from the event loop, before its body is read.  One
person's sheet sends two or three at a time; the limit only bites under a
flood (``make load``).  Heavy work has its own limits (app/web/workers.py).
"""

from __future__ import annotations

from typing import Final

from starlette.responses import JSONResponse
from starlette.types import ASGIApp, Receive, Scope, Send

from ringwise.web import errors

#: Light computations at once in the server's own process: a few per core keeps
#: both busy while the event loop still gets the interpreter lock often
#: (common practice, no source).
LIGHT_LIMIT: Final = 8
#: ``Retry-After`` of a refusal, s: a light answer takes well under a second.
RETRY_AFTER_S: Final = 1
#: The paths that compute in the server's process (exact), and path prefixes.
LIGHT_PATHS: Final = frozenset(
    {
        "/",
        "/sheet.json",
        "/summary.json",
        "/api/analyze",
        "/api/threshold",
        "/api/snap",
        "/api/sheet",
        "/api/sheet/steady",
        "/api/sheet/sweep",
        "/api/sheet/snap",
    }
)
LIGHT_PREFIXES: Final = ("/api/csv/sheet/",)
BUSY: Final = (
    f"the server is busy: {LIGHT_LIMIT} answers are being computed already; "
    f"try again in {RETRY_AFTER_S} s"
)


def is_light(path: str) -> bool:
    return path in LIGHT_PATHS or path.startswith(LIGHT_PREFIXES)


class LightLimit:
    """At most ``limit`` light computations at once; past it 503 at once (module doc)."""

    def __init__(self, app: ASGIApp, limit: int = LIGHT_LIMIT) -> None:
        self.app = app
        self.limit = limit
        self.running = 0  # touched on the event loop only

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http" or not is_light(scope["path"]):
            await self.app(scope, receive, send)
            return
        if self.running >= self.limit:
            body = errors.error_body(503, BUSY, [errors.problem("request", BUSY, "busy")])
            response = JSONResponse(
                body, status_code=503, headers={"Retry-After": str(RETRY_AFTER_S)}
            )
            await response(scope, receive, send)
            return
        self.running += 1
        try:
            await self.app(scope, receive, send)
        finally:
            self.running -= 1
