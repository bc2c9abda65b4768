"""``HEAD`` wherever ``GET`` is answered (RFC 9110, 9.3.2: same headers, no content).

FastAPI registers only the methods a route names, so a ``HEAD`` on a page or
a JSON twin would be 405.  :class:`HeadAsGet` runs such a request as a
``GET`` and sends its status and headers (``Content-Length`` included) but
no body.  A path with no ``GET`` keeps its 405.
"""

from __future__ import annotations

from starlette.types import ASGIApp, Message, Receive, Scope, Send


class HeadAsGet:
    """Answer ``HEAD`` as ``GET`` without the body (module doc)."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http" or scope["method"] != "HEAD":
            await self.app(scope, receive, send)
            return

        async def headers_only(message: Message) -> None:
            if message["type"] == "http.response.body":
                if not message.get("more_body", False):
                    await send({"type": "http.response.body", "body": b"", "more_body": False})
                return
            await send(message)

        await self.app({**scope, "method": "GET"}, receive, headers_only)
