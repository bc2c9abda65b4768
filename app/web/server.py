"""The FastAPI application and ``ringwise serve``."""

from __future__ import annotations

import contextlib
import gc
import ipaddress
import os
import sys
from collections.abc import AsyncIterator, Awaitable, Callable, Iterable
from pathlib import PurePosixPath
from typing import Any, Final

from fastapi import FastAPI, Request, Response
from fastapi.middleware.gzip import GZipMiddleware
from fastapi.responses import FileResponse
from fastapi.staticfiles import StaticFiles

from ringwise.web import apidocs, errors
from ringwise.web.assets import IMMUTABLE_MAX_AGE, plotly_js
from ringwise.web.bodies import BODY_SECONDS, MAX_BODY_BYTES, TOO_LARGE, BodyGuard
from ringwise.web.fields import texts_from_document
from ringwise.web.hosts import HostGuard
from ringwise.web.light import Light, LightLimit, light_of
from ringwise.web.methods import HeadAsGet
from ringwise.web.paths import STATIC_DIR
from ringwise.web.routers import api, downloads, jobs, pages, simulate, spread, tools
from ringwise.web.samples import DEFAULT_SAMPLE, OPENED_DESIGN, samples
from ringwise.web.schemas import ErrorOut
from ringwise.web.workers import Work, work_of

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


#: File kinds served from ``static/`` (the package's ``__init__.py`` is not an asset).
ASSET_SUFFIXES: Final = frozenset({".js", ".css", ".svg"})
#: Answers smaller than this, bytes, are sent uncompressed (gzip's header and
#: the work outweigh the saving; Starlette's default, common practice).
GZIP_MIN_BYTES: Final = 500
#: gzip's level: the fastest.  The answers cross the loopback, where bytes cost
#: nothing, and are compressed on the event loop: a 26 kB analysis 0.16 ms at
#: level 1 against 0.70 ms at 9 (Starlette's default) for 5 % more bytes.
GZIP_LEVEL: Final = 1
#: An idle kept-alive connection is closed after this long, s: longer than any
#: Retry-After we send (uvicorn's 5 s equals the heavy refusals' 5 s, so a client
#: coming back on time raced the close and read a dropped connection).
KEEP_ALIVE_S: Final = 15


class AssetFiles(StaticFiles):
    """``StaticFiles`` limited to the sheet's asset kinds."""

    def lookup_path(self, path: str) -> tuple[str, os.stat_result | None]:
        if PurePosixPath(path).suffix not in ASSET_SUFFIXES:
            return "", None
        return super().lookup_path(path)


def _document_errors(app: FastAPI) -> None:
    """Every error answer in the OpenAPI schema has the one error shape, every
    operation that takes a body documents the body cap (413), and every field
    bound is written with JSON Schema's keywords."""
    build = app.openapi

    def openapi() -> dict[str, Any]:
        if app.openapi_schema:
            return app.openapi_schema
        schema = build()
        found = ErrorOut.model_json_schema(ref_template="#/components/schemas/{model}")
        shared = schema.setdefault("components", {}).setdefault("schemas", {})
        shared.update(found.pop("$defs", {}))
        shared["ErrorOut"] = found
        content = {"application/json": {"schema": {"$ref": "#/components/schemas/ErrorOut"}}}
        for operations in schema["paths"].values():
            for operation in operations.values():
                responses = operation.setdefault("responses", {})
                responses.setdefault(
                    "503", {"description": "Busy: too many at once; try again after Retry-After"}
                )
                if "requestBody" in operation:
                    responses["400"] = {"description": "The body could not be read"}
                    responses["413"] = {"description": TOO_LARGE[0].upper() + TOO_LARGE[1:]}
                for code, response in responses.items():
                    if code[0] in "45":
                        response["content"] = content
        for unused in ("HTTPValidationError", "ValidationError"):
            shared.pop(unused, None)
        _standard_bounds(schema)
        apidocs.readable(schema)
        app.openapi_schema = schema
        return schema

    app.openapi = openapi  # type: ignore[method-assign]


#: pydantic writes a bound it cannot fold into the JSON schema (one behind a
#: BeforeValidator, as on the design's quantities) under its own names.
_BOUND_KEYWORDS: Final = {
    "ge": "minimum",
    "le": "maximum",
    "gt": "exclusiveMinimum",
    "lt": "exclusiveMaximum",
}


def _standard_bounds(node: Any) -> None:
    """Rename pydantic's ``ge``/``le``/``gt``/``lt`` to JSON Schema's bound keywords, in place."""
    if isinstance(node, dict):
        if node.get("type") in ("number", "integer"):
            for ours, standard in _BOUND_KEYWORDS.items():
                if ours in node and standard not in node:
                    node[standard] = node.pop(ours)
        for value in node.values():
            _standard_bounds(value)
    elif isinstance(node, list):
        for value in node:
            _standard_bounds(value)


@contextlib.asynccontextmanager
async def lifespan(app: FastAPI) -> AsyncIterator[None]:
    """The worker processes for the app's life, made at start-up and let go at the
    end: the heavy work's pool (app/web/workers.py) and the light one (app/web/light.py)."""
    work, light = work_of(app), light_of(app)
    work.start("process")
    light.start("process")
    # what the server imported lives as long as it: out of the collector's full
    # passes (their pauses would hold up every request the event loop serves)
    gc.freeze()
    try:
        yield
    finally:
        light.shutdown()
        work.shutdown()


def create_app(
    default_design: str = DEFAULT_SAMPLE,
    document: dict[str, Any] | None = None,
    *,
    body_seconds: float = BODY_SECONDS,
    allow_hosts: Iterable[str] = (),
) -> FastAPI:
    """The web app; ``default_design`` is the sample the sheet opens on, or
    ``document`` a design file's JSON (``ringwise serve DESIGN.json``);
    ``body_seconds`` the time a request body may take to arrive, ``allow_hosts``
    the names it answers to beside the loopback ones (app/web/hosts.py)."""
    opened = None
    if document is not None:
        opened = texts_from_document(document)
        default_design = OPENED_DESIGN
    elif default_design not in samples():
        known = ", ".join(samples())
        raise ValueError(f"no sample design named {default_design!r}; known: {known}")
    app = FastAPI(
        title="ringwise",
        summary="Design sheet for Colpitts-family LC oscillators",
        version="1",
        # FastAPI's docs pages load their scripts from a CDN; ours (/docs) are
        # served from an installed package (app/web/apidocs.py)
        docs_url=None,
        redoc_url=None,
        generate_unique_id_function=apidocs.operation_id,
        # the worker processes live as long as the app
        lifespan=lifespan,
    )
    app.state.default_design = default_design
    app.state.opened_texts = opened
    app.state.work = Work()
    app.state.light = Light()
    app.state.spreads = {}  # the last spread of each recent design, for the summary
    errors.install(app)
    app.include_router(api.router)
    app.include_router(tools.router)
    app.include_router(simulate.router)
    app.include_router(jobs.router)
    app.include_router(spread.router)
    app.include_router(downloads.router)
    app.include_router(pages.router)
    app.mount("/static", AssetFiles(directory=STATIC_DIR), name="static")
    apidocs.install(app)
    vendored = plotly_js()

    @app.get(vendored.url, include_in_schema=False)
    def plotly() -> FileResponse:
        return FileResponse(vendored.path, media_type="text/javascript")

    # added before the headers middleware, so it runs inside it: refused bodies get the headers
    app.add_middleware(BodyGuard, limit=MAX_BODY_BYTES, seconds=body_seconds)
    # outside the body guard: a light computation past its limit is refused unread (light.py)
    app.add_middleware(LightLimit)
    app.add_middleware(HeadAsGet)
    # outside the body guard: a foreign Host or Origin is refused before any body is read
    app.add_middleware(HostGuard, hosts=tuple(allow_hosts))
    # "/x/" is not redirected to "/x": such a redirect is an absolute URL built from the Host
    app.router.redirect_slashes = False
    # text answers (plotly.js is 4.8 MB, a third of that gzipped) compressed when asked for
    app.add_middleware(GZipMiddleware, minimum_size=GZIP_MIN_BYTES, compresslevel=GZIP_LEVEL)

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

    _document_errors(app)
    return app


#: Bind addresses meaning "every interface": not a name a browser would send as Host.
WILDCARD_ADDRESSES: Final = ("0.0.0.0", "::", "")


def _is_loopback(host: str) -> bool:
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def serve(
    host: str = "127.0.0.1",
    port: int = 8000,
    design: str | None = None,
    document: dict[str, Any] | None = None,
    allow_hosts: Iterable[str] = (),
) -> None:
    """Serve the sheet with uvicorn until interrupted, opening on the sample
    ``design`` or on the design file's JSON ``document``.

    The server answers to the loopback names, to ``host`` when it is one
    address (not a wildcard such as 0.0.0.0), and to ``allow_hosts``.
    """
    import uvicorn

    names = list(allow_hosts)
    if host not in WILDCARD_ADDRESSES:
        names.append(host)
    try:
        app = create_app(design or DEFAULT_SAMPLE, document, allow_hosts=names)
        shown = f"[{host}]" if ":" in host else host
        app.state.served_at = "" if host in WILDCARD_ADDRESSES else f"http://{shown}:{port}"
    except ValueError as err:
        print(f"ringwise: {err}", file=sys.stderr)
        raise SystemExit(2) from err
    shown_host = f"[{host}]" if ":" in host else host
    print(f"ringwise: the design sheet is at http://{shown_host}:{port}/  (Ctrl+C stops it)")
    if not _is_loopback(host):
        print(
            f"ringwise: WARNING: listening on {host}, reachable from other computers; "
            "the sheet has no authentication.",
            file=sys.stderr,
        )
    uvicorn.run(app, host=host, port=port, log_level="warning", timeout_keep_alive=KEEP_ALIVE_S)
