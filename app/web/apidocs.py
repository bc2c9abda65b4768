"""The interactive API docs at ``/docs``, and what makes the OpenAPI readable.

Swagger UI comes from the installed ``swagger-ui-bundle-v2`` package (served
under ``/vendor/``, no CDN) and starts from ``static/docs.js`` (no inline
script, so the page runs under the app's Content-Security-Policy).  The
OpenAPI document gets operation ids named after the route functions
(``post_analyze`` rather than FastAPI's ``post_analyze_api_analyze_post``),
one tag per route from :data:`TAGS` (by path), and the sample designs as
examples of every design in a request body.
"""

from __future__ import annotations

import re
from functools import cache
from pathlib import Path
from typing import Any, Final

from fastapi import FastAPI, Request
from fastapi.responses import FileResponse, HTMLResponse
from fastapi.routing import APIRoute

from ringwise.web.samples import samples

#: Tag of each route, by the longest matching path prefix, with its description.
TAGS: Final = (
    ("/api/analyze", "analysis", "The full analysis of a design"),
    ("/api/sweep", "analysis", None),
    ("/api/threshold", "analysis", None),
    ("/api/designs", "sample designs", "The sample designs, by name"),
    ("/api/sheet/spread", "sheet tools", "The sheet's on-demand panels (form texts in)"),
    ("/api/sheet/snap", "sheet tools", None),
    ("/api/sheet/synthesize", "sheet tools", None),
    ("/api/sheet/reconcile", "sheet tools", None),
    ("/api/sheet", "sheet", "The live sheet: form texts in, everything shown out"),
    ("/api/import", "design files", "Reading and writing design files"),
    ("/api/export", "design files", None),
    ("/api/simulate", "time domain", "The nonlinear transient, at once or as a job"),
    ("/api/spread", "tolerances", "Monte Carlo over tolerances and temperature"),
    ("/api/snap", "standard values", "Every part moved to an IEC 60063 series"),
    ("/api/synthesize", "synthesis", "A design from targets"),
    ("/api/reconcile", "bench readings", "The model fitted to bench readings"),
    ("/api/jobs", "jobs", "Long work as jobs: progress, partial result, stop"),
    ("/api/csv", "downloads", "CSV of the sheet's plots and the Monte Carlo samples"),
    ("/", "pages", "The sheet and its printed summary, with JSON twins"),
)
SWAGGER_FILES: Final = ("swagger-ui-bundle.js", "swagger-ui.css")


def operation_id(route: APIRoute) -> str:
    """A route's operation id: its function's name (unique across the app)."""
    return route.name


def tag_of(path: str) -> str:
    prefix = max((p for p, _t, _d in TAGS if path.startswith(p)), key=len)
    return next(t for p, t, _d in TAGS if p == prefix)


@cache
def _swagger() -> tuple[Path, str]:
    from swagger_ui_bundle import swagger_ui_path

    folder = Path(str(swagger_ui_path))
    match = re.search(r"(\d+\.\d+\.\d+)$", folder.name)
    return folder, match.group(1) if match else "unknown"


def swagger_url(name: str) -> str:
    return f"/vendor/swagger-ui-{_swagger()[1]}/{name}"


def readable(schema: dict[str, Any]) -> dict[str, Any]:
    """Tags by path and the samples as examples, in place."""
    for path, operations in schema.get("paths", {}).items():
        for operation in operations.values():
            operation["tags"] = [tag_of(path)]
    schema["tags"] = [{"name": t, "description": d} for _p, t, d in TAGS if d]
    design = schema.get("components", {}).get("schemas", {}).get("Design")
    if design is not None:
        design["examples"] = [s.document for s in samples().values()]
    return schema


def install(app: FastAPI) -> None:
    """The /docs page and the vendored Swagger UI files."""
    from ringwise.web.templating import templates

    folder, _version = _swagger()

    @app.get("/docs", response_class=HTMLResponse, include_in_schema=False)
    def docs(request: Request) -> HTMLResponse:
        context = {"css": swagger_url("swagger-ui.css"), "js": swagger_url("swagger-ui-bundle.js")}
        return templates.TemplateResponse(request, "docs.html", context)

    for name in SWAGGER_FILES:
        media = "text/css" if name.endswith(".css") else "text/javascript"

        def asset(path: Path = folder / name, media: str = media) -> FileResponse:
            return FileResponse(path, media_type=media)

        app.add_api_route(swagger_url(name), asset, include_in_schema=False, name=f"swagger:{name}")
