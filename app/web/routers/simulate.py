"""The transient on demand: ``POST /api/simulate`` and its jobs.

``POST /api/simulate`` answers with the whole run (it takes about a second
for 300 cycles).  The sheet uses the jobs instead, to show real progress and
to stop::

    POST   /api/simulate/jobs        {design, cycles, points}  -> 202 {id, state, progress}
    GET    /api/simulate/jobs/{id}   -> {id, state, progress, result?, error?, view?}
    DELETE /api/simulate/jobs/{id}   -> the job, stopped

(the same jobs as ``/api/jobs/{id}``, app/web/routers/jobs.py).  Both run the
core's :func:`ringwise.analysis.transient.simulate` in a worker process
(app/web/workers.py), never on the event loop and never under the server's
interpreter lock.  The work is bounded: every request's cycles and points are
capped (the core's ``MIN_CYCLES``, ``MAX_CYCLES``, ``MAX_POINTS``), at most
:data:`MAX_RUNNING` runs are outstanding (a further one is refused with 429
and ``Retry-After``), a run whose client goes away is stopped, and at most
``MAX_KEPT`` jobs are remembered, none longer than ``KEEP_SECONDS`` after it
ends.  Jobs live only in this process's memory; their ids are random
(:func:`secrets.token_urlsafe`) and never written anywhere.
"""

from __future__ import annotations

import logging
import math
from typing import Annotated, Any, Final, Literal

from fastapi import APIRouter, Query, Request, Response
from fastapi.responses import JSONResponse
from pydantic import BaseModel, Field

from ringwise.analysis.transient import MAX_CYCLES, MAX_POINTS, MIN_CYCLES, simulate
from ringwise.design import Design
from ringwise.exports import columns_csv, result_series
from ringwise.result import SimulationResult
from ringwise.web.dependencies import csv_response
from ringwise.web.errors import ApiError
from ringwise.web.routers.jobs import checked
from ringwise.web.schemas import RequestModel
from ringwise.web.view import run_view
from ringwise.web.workers import LIMITS, Job, Progress, work_of

log = logging.getLogger("ringwise.web")

router = APIRouter(prefix="/api", tags=["simulate"])

#: Fewest points a run may return: the lower bound that
#: ``ringwise.analysis.transient.run`` checks (a literal there).
MIN_POINTS: Final = 100
#: Cycles and points when the request does not say (the CLI's defaults).
DEFAULT_CYCLES: Final = 300
DEFAULT_POINTS: Final = 4000
#: Points the sheet asks for: enough for its plots, a light answer.
SHEET_POINTS: Final = 1500
#: How often the sheet polls a running job, ms.
POLL_MS: Final = 150
#: Runs outstanding at once, over the synchronous endpoint and the jobs together
#: (app/web/workers.py's limit for the kind).
MAX_RUNNING: Final = LIMITS["simulate"]

State = Literal["queued", "running", "done", "cancelled", "failed"]


class SimulateRequest(RequestModel):
    design: Design
    cycles: int = Field(
        DEFAULT_CYCLES,
        ge=MIN_CYCLES,
        le=MAX_CYCLES,
        description=(
            f"Periods of the small-signal f_osc to simulate, {MIN_CYCLES} to {MAX_CYCLES} "
            "(about 1 s of server time per 300 cycles)"
        ),
    )
    points: int = Field(
        DEFAULT_POINTS,
        ge=MIN_POINTS,
        le=MAX_POINTS,
        description=f"Most samples in each returned curve, {MIN_POINTS} to {MAX_POINTS}",
    )


class JobOut(BaseModel):
    id: str = Field(description="Random id of the job (kept in memory only)")
    state: State
    progress: float = Field(description="Fraction of the run done, 0 to 1")
    result: SimulationResult | None = Field(None, description="The run, once state is done")
    error: dict[str, Any] | None = Field(
        None, description="Why the run failed, in the API's error shape, once state is failed"
    )
    view: dict[str, Any] | None = Field(
        None, description="With ?view=true, once done: the sheet's figures and plot data"
    )


ERRORS: dict[int | str, dict[str, Any]] = {
    422: {"description": "Invalid input (cycles or points beyond their bounds, a bad design)"},
    429: {"description": f"{MAX_RUNNING} runs are going already; wait or cancel one"},
    503: {"description": "The server is stopping"},
}
JOB_ERRORS: dict[int | str, dict[str, Any]] = {
    404: {"description": "No such job (never made, finished long ago, or dropped)"},
    422: {"description": "Not a job id"},
}


def _finite(value: Any) -> Any:
    """``value`` with every non-finite float replaced by ``None`` (JSON has no NaN)."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_finite(v) for v in value]
    return value


def _run(req: SimulateRequest, progress: Progress | None = None) -> dict[str, Any]:
    """The run of ``req`` as JSON data (in a worker)."""
    result = simulate(req.design, cycles=req.cycles, points=req.points, progress=progress)
    return _finite(result.model_dump(mode="json"))


def _out(job: Job, with_view: bool = False) -> dict[str, Any]:
    body = {k: v for k, v in job.out().items() if k != "kind"}
    if job.state == "cancelled":
        body.pop("result", None)  # a stopped run keeps nothing
    if with_view and job.state == "done" and job.result is not None:
        body["view"] = run_view(job.result)
    return body


def find_run(request: Request, job_id: str) -> Job:
    """The simulation job ``job_id`` (404 if there is none)."""
    try:
        return work_of(request.app).get(checked(job_id), kind="simulate")
    except ApiError as err:
        if err.status != 404:
            raise
        raise ApiError(404, "no simulation job with that id (it may have been dropped)") from err


@router.post("/simulate", response_model=SimulationResult, responses=ERRORS)
async def post_simulate(req: SimulateRequest, request: Request) -> JSONResponse:
    """Nonlinear transient of the whole circuit (the core's simulation contract).

    Runs in a worker process and is stopped if the client goes away.  ``cycles``
    is capped at the core's ``MAX_CYCLES`` and ``points`` at ``MAX_POINTS``;
    beyond them the answer is 422 naming the field and its bound.
    """
    return JSONResponse(await work_of(request.app).run(request, "simulate", _run, req))


@router.post("/simulate/jobs", status_code=202, response_model=JobOut, responses=ERRORS)
def post_job(req: SimulateRequest, request: Request) -> JSONResponse:
    """Start a transient in the background; poll it with ``GET /api/simulate/jobs/{id}``."""
    job = work_of(request.app).submit("simulate", _run, req, keep=True, request=req)
    return JSONResponse(_out(job), status_code=202)


@router.get("/simulate/jobs/{job_id}", response_model=JobOut, responses=JOB_ERRORS)
def get_job(
    job_id: str,
    request: Request,
    view: Annotated[
        bool, Query(description="Add what the sheet shows of the result (texts, plot data)")
    ] = False,
) -> JSONResponse:
    """A job's state and progress, and its result once done."""
    return JSONResponse(_out(find_run(request, job_id), view))


@router.delete("/simulate/jobs/{job_id}", response_model=JobOut, responses=JOB_ERRORS)
async def delete_job(job_id: str, request: Request) -> JSONResponse:
    """Stop a running job (the solver stops at its next progress report)."""
    job = find_run(request, job_id)
    return JSONResponse(_out(await work_of(request.app).stopped(job)))


@router.get("/simulate/jobs/{job_id}/csv/{series}", responses=JOB_ERRORS, response_class=Response)
def get_job_csv(
    job_id: str, series: Literal["waveform", "envelope", "spectrum"], request: Request
) -> Response:
    """A finished run's waveform, envelope or spectrum as CSV (SI units)."""
    job = find_run(request, job_id)
    if job.state != "done" or job.result is None:
        raise ApiError(409, f"the job is {job.state}; its curves exist once it is done")
    header, cols = result_series(job.result, series)
    return csv_response(columns_csv(header, cols), f"ringwise-run-{series}.csv")
