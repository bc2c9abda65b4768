"""The JSON API: thin routes that validate, call the core and return its answer."""

from __future__ import annotations

import re
from typing import Annotated, Any

from fastapi import APIRouter, Body, Request
from fastapi.responses import JSONResponse, Response
from pydantic import ValidationError

from ringwise.analysis.analyze import analyze
from ringwise.analysis.threshold import ParameterError, find_threshold, sweep
from ringwise.circuit.topologies import gain_setter
from ringwise.design import Design
from ringwise.result import Result, from_attributes
from ringwise.web.dependencies import ERRORS, form_texts, texts_for
from ringwise.web.errors import ApiError, from_validation, invalid
from ringwise.web.fields import (
    BY_NAME,
    DocumentError,
    check_field,
    document,
    texts_from_document,
)
from ringwise.web.light import light_of
from ringwise.web.samples import samples
from ringwise.web.schemas import (
    ImportOut,
    SampleOut,
    SheetRequest,
    SheetSweepRequest,
    SheetView,
    SweepOut,
    SweepRequest,
    ThresholdOut,
    ThresholdRequest,
)
from ringwise.web.view import build_view, query_string, sweep_view
from ringwise.web.workers import work_of

router = APIRouter(prefix="/api", tags=["api"])

#: The heavy routes' answers: also 429 when too many of the kind are outstanding.
HEAVY_ERRORS: dict[int | str, dict[str, Any]] = {
    **ERRORS,
    429: {"description": "Too many of this kind running or waiting; see Retry-After"},
    503: {"description": "The server is stopping"},
}


@router.post("/analyze", response_model=Result, responses=ERRORS)
async def post_analyze(design: Design, request: Request) -> Response:
    """The full analysis of a design (the core's result contract), computed in a
    light worker process (app/web/light.py)."""
    return await light_of(request.app).json(analyze, design)


def _bound(param: str, key: str, value: float | str) -> float:
    field = BY_NAME.get(param)
    if field is None or field.kind != "quantity":
        raise invalid("param", f"unknown parameter {param!r}", "value_error")
    state = check_field(field, str(value))
    if state.error or not isinstance(state.value, float):
        raise invalid(key, state.error or "is required", "value_error")
    return state.value


def run_sweep(req: SweepRequest, start: float, stop: float) -> SweepOut:
    """The sweep of ``req`` from ``start`` to ``stop`` (in a worker)."""
    try:
        s = sweep(req.design, req.param, start, stop, req.points, req.scale)
    except ParameterError as err:
        raise invalid("param", str(err)) from err
    return from_attributes(SweepOut, s, threshold=from_attributes(ThresholdOut, s.threshold))


@router.post("/sweep", response_model=SweepOut, responses=HEAVY_ERRORS)
async def post_sweep(req: SweepRequest, request: Request) -> SweepOut:
    """f_osc and loop gain along one part's values, the others fixed, with its threshold.

    A sweep over a size (up to ``MAX_SWEEP_POINTS`` points) runs in a worker process."""
    start = _bound(req.param, "start", req.start)
    stop = _bound(req.param, "stop", req.stop)
    return await work_of(request.app).run(
        request, "sweep", run_sweep, req, start, stop, with_progress=False
    )


@router.post("/threshold", response_model=ThresholdOut, responses=ERRORS)
def post_threshold(req: ThresholdRequest) -> ThresholdOut:
    """Value of one part at which the loop gain is exactly 1 (default: the gain setter)."""
    param = req.param or gain_setter(req.design)
    try:
        t = find_threshold(req.design, param)
    except ParameterError as err:
        raise invalid("param", str(err)) from err
    return ThresholdOut(param=t.param, value=t.value, current=t.current, reason=t.reason)


@router.get("/designs", response_model=list[SampleOut])
def list_designs() -> list[SampleOut]:
    """The sample designs."""
    return [
        SampleOut(name=s.key, title=s.title, topology=s.topology, url=f"/?design={s.key}")
        for s in samples().values()
    ]


@router.get("/designs/{name}", responses={404: {"description": "No sample of that name"}})
def get_design(name: str) -> dict[str, Any]:
    """One sample design file, by its key from ``GET /api/designs`` (never a path)."""
    found = samples().get(name)
    if found is None:
        known = ", ".join(samples())
        raise ApiError(404, f"no sample design named {name!r}; known: {known}")
    return found.document


@router.post("/sheet", response_model=SheetView, responses=ERRORS)
def post_sheet(req: SheetRequest) -> JSONResponse:
    """What the sheet shows for these form texts, without the sweep and the steady state,
    with the plots ``figures`` names (default: all).

    An invalid design is not an error here: the answer lists its problems,
    beside their fields, as the page does.  (The view is plain JSON data
    already, so it is sent as it is, without FastAPI's slower generic encoder;
    its shape is ``SheetView``, which a test checks against real answers.)
    """
    view = build_view(
        form_texts(req.fields),
        req.sweep_param,
        with_sweep=False,
        with_steady=False,
        figures=req.figures,
    )
    return JSONResponse(view)


@router.post("/sheet/steady", responses=ERRORS)
def post_sheet_steady(req: SheetRequest) -> JSONResponse:
    """The sheet's view with the periodic steady state (its second answer for an edit).

    The same view as ``POST /api/sheet`` with ``result.steady_state`` filled in and
    everything that depends on it (the verdict, phase noise, part stresses).
    """
    view = build_view(
        form_texts(req.fields), req.sweep_param, with_sweep=False, figures=req.figures
    )
    return JSONResponse(view)


@router.post("/sheet/sweep", responses=ERRORS)
def post_sheet_sweep(req: SheetSweepRequest) -> dict[str, Any]:
    """The sheet's what-if sweep for these form texts."""
    return sweep_view(form_texts(req.fields), req.param, req.threshold_hint)


@router.post("/import", response_model=ImportOut, responses=ERRORS)
def post_import(
    doc: Annotated[Any, Body(description="A design file (ringwise.design)")],
) -> ImportOut:
    """Form texts for a design file; the file's keys are checked, its values are shown as typed."""
    try:
        texts = texts_from_document(doc)
    except DocumentError as err:
        raise ApiError(422, f"not a design file: {err}", err.problems) from err
    return ImportOut(fields=texts, query=query_string(texts))


_SLUG = re.compile(r"[^a-z0-9]+")


@router.get("/export", responses=ERRORS)
def get_export(request: Request) -> JSONResponse:
    """The design of a share link's query as a design file to save (JSON attachment)."""
    texts, link_problems = texts_for(request)
    if link_problems:
        raise ApiError(422, "the link has problems; fix them to export", link_problems)
    doc = document(texts, for_file=True)
    try:
        Design.model_validate(doc)
    except ValidationError as err:
        raise from_validation(err) from err
    slug = _SLUG.sub("-", texts.get("name", "").lower()).strip("-") or "design"
    return JSONResponse(
        doc,
        headers={"Content-Disposition": f'attachment; filename="ringwise-{slug[:60]}.json"'},
    )
