"""The transient on demand: ``POST /api/simulate`` and a small in-memory job queue.

``POST /api/simulate`` answers with the whole run (it takes about a second
for 300 cycles).  The sheet uses the jobs instead, to show real progress and
to cancel::

    POST   /api/simulate/jobs        {design, cycles, points}  -> 202 {id, state, progress}
    GET    /api/simulate/jobs/{id}   -> {id, state, progress, result?, error?}
    DELETE /api/simulate/jobs/{id}   -> the job, cancelled

Both run the core's :func:`ringwise.analysis.transient.simulate` in a thread of
its own, never on the event loop.  The work is bounded: every request's
cycles and points are capped (the core's ``MIN_CYCLES``, ``MAX_CYCLES``,
``MAX_POINTS``), at most :data:`MAX_RUNNING` runs go at once (a further one
is refused with 429), and at most :data:`MAX_KEPT` jobs are remembered,
the oldest finished ones dropped first and none kept longer than
:data:`KEEP_SECONDS` after it ends.  Jobs live only in this process's
memory; their ids are random (:func:`secrets.token_urlsafe`) and never
written anywhere.
"""

from __future__ import annotations

import logging
import math
import secrets
import threading
import time
from dataclasses import dataclass, field
from typing import Annotated, Any, Final, Literal

from fastapi import APIRouter, Query, Request, Response
from fastapi.responses import JSONResponse
from pydantic import BaseModel, Field

from ringwise.analysis.transient import (
    MAX_CYCLES,
    MAX_POINTS,
    MIN_CYCLES,
    SimulationCancelledError,
    simulate,
)
from ringwise.design import Design
from ringwise.errors import domain_message
from ringwise.exports import columns_csv, result_series
from ringwise.result import SimulationResult
from ringwise.web.dependencies import csv_response
from ringwise.web.errors import ApiError, error_body, invalid
from ringwise.web.schemas import RequestModel
from ringwise.web.view import run_view

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
#: Runs going at once, over the synchronous endpoint and the jobs together
#: (the solver is CPU-bound Python; this machine has two cores).
MAX_RUNNING: Final = 2
#: Jobs remembered at most (running and finished); the oldest finished go first.
MAX_KEPT: Final = 16
#: A finished job is forgotten this long after it ended, s.
KEEP_SECONDS: Final = 600.0

State = Literal["running", "done", "cancelled", "failed"]


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
}
JOB_ERRORS: dict[int | str, dict[str, Any]] = {
    404: {"description": "No such job (never made, finished long ago, or dropped)"},
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


def _run(req: SimulateRequest, progress: Any = None) -> dict[str, Any]:
    result = simulate(req.design, cycles=req.cycles, points=req.points, progress=progress)
    return _finite(result.model_dump(mode="json"))


def _failure(err: Exception) -> dict[str, Any]:
    """The error body a failed run reports (domain errors are the user's to fix)."""
    if isinstance(err, ValueError | ArithmeticError):
        return error_body(422, f"design: {domain_message(err)}", [_problem(domain_message(err))])
    log.error("simulation failed", exc_info=err)
    return error_body(500, "unexpected error in the simulation; please report it", [])


def _problem(message: str) -> dict[str, str]:
    return {"field": "design", "message": message, "type": "domain_error"}


@dataclass
class Job:
    id: str
    request: SimulateRequest
    state: State = "running"
    progress: float = 0.0
    result: dict[str, Any] | None = None
    error: dict[str, Any] | None = None
    ended: float | None = None
    cancel: threading.Event = field(default_factory=threading.Event)
    finished: threading.Event = field(default_factory=threading.Event)

    def out(self, with_view: bool = False) -> dict[str, Any]:
        body: dict[str, Any] = {"id": self.id, "state": self.state, "progress": self.progress}
        if self.state == "done":
            body["result"] = self.result
            if with_view and self.result is not None:
                body["view"] = run_view(self.result)
        if self.state == "failed":
            body["error"] = self.error
        return body


class Jobs:
    """The jobs of one app, and the run slots shared with ``POST /api/simulate``."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._jobs: dict[str, Job] = {}
        self.slots = threading.BoundedSemaphore(MAX_RUNNING)

    def take_slot(self) -> None:
        if not self.slots.acquire(blocking=False):
            raise ApiError(
                429,
                f"{MAX_RUNNING} simulations are running already; wait for one or cancel it",
            )

    def submit(self, req: SimulateRequest) -> Job:
        self.take_slot()
        job = Job(id=secrets.token_urlsafe(18), request=req)
        with self._lock:
            self._prune()
            self._jobs[job.id] = job
        threading.Thread(target=self._work, args=(job,), daemon=True, name="ringwise-sim").start()
        return job

    def get(self, job_id: str) -> Job:
        with self._lock:
            self._prune()
            job = self._jobs.get(job_id)
        if job is None:
            raise ApiError(404, "no simulation job with that id (it may have been dropped)")
        return job

    def cancel(self, job_id: str) -> Job:
        job = self.get(job_id)
        with self._lock:
            if job.state == "running":
                job.cancel.set()
                job.state = "cancelled"
                job.ended = time.monotonic()
        return job

    def _prune(self) -> None:
        """Forget jobs ended too long ago, then the oldest ended ones beyond the cap."""
        now = time.monotonic()
        for key, job in list(self._jobs.items()):
            if job.ended is not None and now - job.ended > KEEP_SECONDS:
                del self._jobs[key]
        ended = [k for k, j in self._jobs.items() if j.ended is not None]
        for key in ended[: max(0, len(self._jobs) - MAX_KEPT + 1)]:
            del self._jobs[key]

    def _work(self, job: Job) -> None:
        def progress(fraction: float) -> bool:
            job.progress = min(1.0, max(job.progress, float(fraction)))
            return not job.cancel.is_set()

        try:
            result = _run(job.request, progress)
        except SimulationCancelledError:
            result = None
        except Exception as err:  # reported to the client as the job's error
            with self._lock:
                if job.state == "running":
                    job.state, job.error, job.ended = "failed", _failure(err), time.monotonic()
        else:
            with self._lock:
                if job.state == "running":
                    job.state, job.result, job.progress = "done", result, 1.0
                    job.ended = time.monotonic()
        finally:
            self.slots.release()
            job.finished.set()


_STORE_LOCK = threading.Lock()


def jobs_of(request: Request) -> Jobs:
    """The app's job store, made on first use."""
    state = request.app.state
    with _STORE_LOCK:
        store = getattr(state, "simulation_jobs", None)
        if store is None:
            store = state.simulation_jobs = Jobs()
    return store


@router.post("/simulate", response_model=SimulationResult, responses=ERRORS)
def post_simulate(req: SimulateRequest, request: Request) -> JSONResponse:
    """Nonlinear transient of the whole circuit (the core's simulation contract).

    Runs in a worker thread, not on the event loop.  ``cycles`` is capped at
    the core's ``MAX_CYCLES`` and ``points`` at ``MAX_POINTS``; beyond them
    the answer is 422 naming the field and its bound.
    """
    store = jobs_of(request)
    store.take_slot()
    try:
        return JSONResponse(_run(req))
    finally:
        store.slots.release()


@router.post("/simulate/jobs", status_code=202, response_model=JobOut, responses=ERRORS)
def post_job(req: SimulateRequest, request: Request) -> JSONResponse:
    """Start a transient in the background; poll it with ``GET /api/simulate/jobs/{id}``."""
    job = jobs_of(request).submit(req)
    return JSONResponse(job.out(), status_code=202)


@router.get("/simulate/jobs/{job_id}", response_model=JobOut, responses=JOB_ERRORS)
def get_job(
    job_id: str,
    request: Request,
    view: Annotated[
        bool, Query(description="Add what the sheet shows of the result (texts, plot data)")
    ] = False,
) -> JSONResponse:
    """A job's state and progress, and its result once done."""
    return JSONResponse(jobs_of(request).get(_checked(job_id)).out(view))


@router.delete("/simulate/jobs/{job_id}", response_model=JobOut, responses=JOB_ERRORS)
def delete_job(job_id: str, request: Request) -> JSONResponse:
    """Cancel a running job (the solver stops at its next progress report)."""
    return JSONResponse(jobs_of(request).cancel(_checked(job_id)).out())


@router.get("/simulate/jobs/{job_id}/csv/{series}", responses=JOB_ERRORS, response_class=Response)
def get_job_csv(
    job_id: str, series: Literal["waveform", "envelope", "spectrum"], request: Request
) -> Response:
    """A finished run's waveform, envelope or spectrum as CSV (SI units)."""
    job = jobs_of(request).get(_checked(job_id))
    if job.state != "done" or job.result is None:
        raise ApiError(409, f"the job is {job.state}; its curves exist once it is done")
    header, cols = result_series(job.result, series)
    return csv_response(columns_csv(header, cols), f"ringwise-run-{series}.csv")


def _checked(job_id: str) -> str:
    if len(job_id) > 64:
        raise invalid("job_id", "is not a job id (too long)")
    return job_id
