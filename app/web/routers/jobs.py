"""Long work as jobs: progress, partial results and stop.

A panel posts its request to ``.../jobs`` (``/api/sheet/spread/jobs``,
``/api/sheet/synthesize/jobs``, ``/api/sheet/reconcile/jobs``; a time-domain
run to ``/api/simulate/jobs``) and gets ``202 {id, kind, state, progress}``
at once, or 429 with ``Retry-After`` when too many of its kind are running
or waiting (app/web/workers.py).  Then::

    GET    /api/jobs/{id}   -> {id, kind, state, progress, result?, error?}
    DELETE /api/jobs/{id}   -> the job, stopped: its state "cancelled", with the
                               result it had where that means something (a spread's
                               samples done, a fit's best explanation so far)

``progress`` is the fraction of the work done, as the core reports it.  Jobs
live in this process's memory only, under random ids.
"""

from __future__ import annotations

from typing import Any, Literal

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse
from pydantic import BaseModel, Field

from ringwise.web.errors import invalid
from ringwise.web.workers import LIMITS, work_of

router = APIRouter(prefix="/api", tags=["jobs"])

#: Longest job id accepted (ids are 24 characters).
MAX_ID: int = 64


class JobOut(BaseModel):
    id: str = Field(description="Random id of the job (kept in memory only)")
    kind: Literal[tuple(LIMITS)] = Field(description="What the job computes")  # type: ignore[valid-type]
    state: Literal["queued", "running", "done", "cancelled", "failed"]
    progress: float = Field(description="Fraction of the work done, 0 to 1")
    result: Any | None = Field(
        None,
        description="The answer once done; once cancelled, what was computed before the stop "
        "(a spread's samples done, a fit's best explanation), where that means something",
    )
    error: dict[str, Any] | None = Field(
        None, description="Why the job failed, in the API's error shape, once state is failed"
    )


#: The answers of a route that starts heavy work.
JOB_STARTED: dict[int | str, dict[str, Any]] = {
    422: {"description": "Invalid input: every problem names its field"},
    429: {"description": "Too many of this kind running or waiting; see Retry-After"},
    503: {"description": "The server is stopping"},
}
JOB_ERRORS: dict[int | str, dict[str, Any]] = {
    404: {"description": "No such job (never made, ended long ago, or dropped)"},
    422: {"description": "Not a job id"},
}


def checked(job_id: str) -> str:
    if len(job_id) > MAX_ID:
        raise invalid("job_id", "is not a job id (too long)")
    return job_id


@router.get("/jobs/{job_id}", response_model=JobOut, responses=JOB_ERRORS)
def get_any_job(job_id: str, request: Request) -> JSONResponse:
    """A job's state and progress; its result once done (or stopped with a partial one)."""
    return JSONResponse(work_of(request.app).get(checked(job_id)).out())


@router.delete("/jobs/{job_id}", response_model=JobOut, responses=JOB_ERRORS)
async def delete_any_job(job_id: str, request: Request) -> JSONResponse:
    """Stop a job: it ends at its next progress report, keeping what it computed
    where that means something; the answer waits a few seconds for it."""
    work = work_of(request.app)
    job = await work.stopped(work.get(checked(job_id)))
    return JSONResponse(job.out())
