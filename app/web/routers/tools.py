"""The sheet's on-demand panels: spread and yield, standard values, design from
targets, bench readings.  Form texts in, the API's answer plus its display texts
out (app/web/tools.py).

Standard values is light: a plain ``def`` route in the thread pool.  The long
ones (spread, from targets, bench readings) run in a worker process
(app/web/workers.py), either answering the request when done or, posted to
``.../jobs``, as a job with progress that can be stopped
(``GET``/``DELETE /api/jobs/{id}``, app/web/routers/jobs.py)."""

from __future__ import annotations

from functools import partial
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse
from pydantic import Field

from ringwise.web import tools
from ringwise.web.dependencies import ERRORS, form_texts
from ringwise.web.routers.jobs import JOB_STARTED, JobOut
from ringwise.web.schemas import RequestModel
from ringwise.web.workers import work_of

router = APIRouter(prefix="/api/sheet", tags=["sheet tools"])

#: Longest text accepted in a panel's own inputs.
TEXT_MAX = 200


_In = RequestModel


class SheetSpreadRequest(_In):
    fields: dict[str, str] = Field(description="Form texts by field name, as typed")
    samples: str = Field(default="2000", max_length=TEXT_MAX, description="Samples (whole number)")
    seed: str = Field(default="1", max_length=TEXT_MAX, description="Random seed (whole number)")
    margin: str = Field(
        default="", max_length=TEXT_MAX, description="Margin loop gain (blank: default)"
    )
    window_low: str = Field(
        default="", max_length=TEXT_MAX, description="Window low end, e.g. 990k"
    )
    window_high: str = Field(
        default="", max_length=TEXT_MAX, description="Window high end, e.g. 1.01M"
    )


def _spread_args(req: SheetSpreadRequest) -> tuple[Any, ...]:
    return (
        form_texts(req.fields), req.samples, req.seed, req.margin, req.window_low, req.window_high
    )  # fmt: skip


@router.post("/spread", responses=JOB_STARTED)
async def post_sheet_spread(req: SheetSpreadRequest, request: Request) -> dict[str, Any]:
    """Monte Carlo for the sheet's texts: the spread answer, figure texts and plot data."""
    args = _spread_args(req)
    view = await work_of(request.app).run(request, "spread", tools.spread_view, *args)
    tools.remember_spread(request.app, args[0], view)
    return view


@router.post("/spread/jobs", status_code=202, response_model=JobOut, responses=JOB_STARTED)
def post_sheet_spread_job(req: SheetSpreadRequest, request: Request) -> JSONResponse:
    """The spread as a job: poll ``GET /api/jobs/{id}`` for progress; ``DELETE`` stops it
    and keeps the samples done."""
    args = _spread_args(req)
    finish = partial(tools.remembered, request.app, args[0])
    job = work_of(request.app).submit("spread", tools.spread_view, *args, keep=True, finish=finish)
    return JSONResponse(job.out(), status_code=202)


class SheetSnapRequest(_In):
    fields: dict[str, str]
    series: str = Field(default="E24", max_length=TEXT_MAX, description="E6, E12, E24, E48 or E96")
    keep_frequency: bool = Field(default=False, description="Re-trim one capacitor to keep f_osc")


@router.post("/snap", responses=ERRORS)
def post_sheet_snap(req: SheetSnapRequest) -> dict[str, Any]:
    """Standard values preview for the sheet's texts, with the snapped form texts."""
    return tools.snap_view(form_texts(req.fields), req.series, req.keep_frequency)


class SheetSynthesizeRequest(_In):
    fields: dict[str, str] = Field(default_factory=dict, description="The sheet's texts now")
    topology: str = Field(default="common-emitter", max_length=TEXT_MAX)
    f: str = Field(default="", max_length=TEXT_MAX, description="Target frequency, e.g. 1M")
    Vcc: str = Field(default="", max_length=TEXT_MAX, description="Supply, e.g. 12")
    IC: str = Field(default="", max_length=TEXT_MAX, description="Collector current, e.g. 1m")
    gain: str = Field(default="", max_length=TEXT_MAX, description="Target loop gain (blank: 3)")
    L: str = Field(default="", max_length=TEXT_MAX, description="Inductor to use (optional)")
    ratio: str = Field(default="", max_length=TEXT_MAX, description="C1/C2 to use (optional)")
    clapp: bool = Field(default=False, description="The Clapp form")
    choose_Q_L: bool = Field(
        default=False, description="Choose the coil's Q (else keep the sheet's)"
    )
    choose_load: bool = Field(default=False, description="Choose the load (else keep the sheet's)")
    choose_device: bool = Field(
        default=False, description="Choose the transistor (else keep the sheet's)"
    )


@router.post("/synthesize", responses=JOB_STARTED)
async def post_sheet_synthesize(req: SheetSynthesizeRequest, request: Request) -> dict[str, Any]:
    """A design from targets, as form texts for the sheet, with its reasons."""
    targets = req.model_dump(exclude={"fields"})
    texts = form_texts(req.fields)
    return await work_of(request.app).run(
        request, "synthesize", tools.synthesize_view, texts, targets
    )


@router.post("/synthesize/jobs", status_code=202, response_model=JobOut, responses=JOB_STARTED)
def post_sheet_synthesize_job(req: SheetSynthesizeRequest, request: Request) -> JSONResponse:
    """The design from targets as a job (``GET``/``DELETE /api/jobs/{id}``)."""
    targets = req.model_dump(exclude={"fields"})
    texts = form_texts(req.fields)
    job = work_of(request.app).submit(
        "synthesize", tools.synthesize_view, texts, targets, keep=True
    )
    return JSONResponse(job.out(), status_code=202)


class SheetReconcileRequest(_In):
    fields: dict[str, str]
    f_measured: str = Field(default="", max_length=TEXT_MAX, description="Bench frequency")
    threshold_param: str = Field(default="", max_length=TEXT_MAX, description="Part varied")
    threshold_value: str = Field(default="", max_length=TEXT_MAX, description="Its value at start")
    amplitude: str = Field(default="", max_length=TEXT_MAX, description="Bench amplitude")
    IC: str = Field(default="", max_length=TEXT_MAX, description="Bench collector current")


@router.post("/reconcile", responses=JOB_STARTED)
async def post_sheet_reconcile(req: SheetReconcileRequest, request: Request) -> dict[str, Any]:
    """Bench readings against the sheet's design: fitted unknowns and the as-built texts."""
    texts, bench = form_texts(req.fields), req.model_dump(exclude={"fields"})
    return await work_of(request.app).run(request, "reconcile", tools.reconcile_view, texts, bench)


@router.post("/reconcile/jobs", status_code=202, response_model=JobOut, responses=JOB_STARTED)
def post_sheet_reconcile_job(req: SheetReconcileRequest, request: Request) -> JSONResponse:
    """The bench fit as a job (``GET``/``DELETE /api/jobs/{id}``); stopped, it keeps the
    best explanation so far."""
    texts, bench = form_texts(req.fields), req.model_dump(exclude={"fields"})
    job = work_of(request.app).submit("reconcile", tools.reconcile_view, texts, bench, keep=True)
    return JSONResponse(job.out(), status_code=202)
