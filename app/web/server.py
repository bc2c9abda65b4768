"""The FastAPI application and ``ringwise serve``."""

from __future__ import annotations

import ipaddress
import sys
from collections.abc import Awaitable, Callable
from typing import Final

from fastapi import FastAPI, Request, Response
from fastapi.responses import FileResponse
from fastapi.staticfiles import StaticFiles

from app.web import errors
from app.web.assets import IMMUTABLE_MAX_AGE, plotly_js
from app.web.paths import STATIC_DIR
from app.web.routers import api, pages, simulate
from app.web.samples import DEFAULT_SAMPLE, samples

#: Scripts, styles, fonts and connections only from this server.  Plotly sets
#: inline styles on the SVG it draws, hence 'unsafe-inline' for styles only.
CONTENT_SECURITY_POLICY: Final = "; ".join(
    (
        "default-src 'self'",
        "script-src 'self'",
        "style-src 'self' 'unsafe-inline'",
        "img-src 'self' data: blob:",
        "font-src 'self'",
        "connect-src 'self'",
        "object-src 'none'",
        "base-uri 'none'",
        "form-action 'self'",
        "frame-ancestors 'none'",
    )
)
SECURITY_HEADERS: Final = {
    "Content-Security-Policy": CONTENT_SECURITY_POLICY,
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "no-referrer",
}


def create_app(default_design: str = DEFAULT_SAMPLE) -> FastAPI:
    """The web app; ``default_design`` is the sample the sheet opens on."""
    if default_design not in samples():
        known = ", ".join(samples())
        raise ValueError(f"no sample design named {default_design!r}; known: {known}")
    app = FastAPI(
        title="ringwise",
        summary="Design sheet for Colpitts-family LC oscillators",
        version="1",
        # The interactive docs pages load their scripts from a CDN; the sheet
        # works offline, so only the schema is served (at /openapi.json).
        docs_url=None,
        redoc_url=None,
    )
    app.state.default_design = default_design
    errors.install(app)
    app.include_router(api.router)
    app.include_router(simulate.router)
    app.include_router(pages.router)
    app.mount("/static", StaticFiles(directory=STATIC_DIR), name="static")
    vendored = plotly_js()

    @app.get(vendored.url, include_in_schema=False)
    def plotly() -> FileResponse:
        return FileResponse(vendored.path, media_type="text/javascript")

    @app.middleware("http")
    async def headers(
        request: Request, call_next: Callable[[Request], Awaitable[Response]]
    ) -> Response:
        response = await call_next(request)
        response.headers.update(SECURITY_HEADERS)
        path = request.url.path
        if path.startswith("/vendor/") or (
            path.startswith("/static/") and "v" in request.query_params
        ):
            response.headers["Cache-Control"] = f"public, max-age={IMMUTABLE_MAX_AGE}, immutable"
        return response

    return app


def _is_loopback(host: str) -> bool:
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def serve(host: str = "127.0.0.1", port: int = 8000, design: str | None = None) -> None:
    """Serve the sheet with uvicorn until interrupted."""
    import uvicorn

    try:
        app = create_app(design or DEFAULT_SAMPLE)
    except ValueError as err:
        print(f"ringwise: --design: {err}", file=sys.stderr)
        raise SystemExit(2) from err
    shown_host = f"[{host}]" if ":" in host else host
    print(f"ringwise: the design sheet is at http://{shown_host}:{port}/  (Ctrl+C stops it)")
    if not _is_loopback(host):
        print(
            f"ringwise: WARNING: listening on {host}, reachable from other computers; "
            "the sheet has no authentication.",
            file=sys.stderr,
        )
    uvicorn.run(app, host=host, port=port, log_level="warning")
