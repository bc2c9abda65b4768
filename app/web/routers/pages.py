"""The pages: the design sheet and its one-page printed summary, with JSON twins."""

from __future__ import annotations

from datetime import date
from typing import Any

from fastapi import APIRouter, Request
from fastapi.concurrency import run_in_threadpool
from fastapi.responses import HTMLResponse

from ringwise.design import Design
from ringwise.web.dependencies import texts_for
from ringwise.web.errors import ApiError
from ringwise.web.fields import page_state
from ringwise.web.templating import page_context, templates
from ringwise.web.tools import last_spread, summary_small_spread, summary_spread
from ringwise.web.view import build_view, run_view
from ringwise.web.workers import work_of

router = APIRouter(tags=["pages"])


def _view(request: Request) -> dict[str, Any]:
    texts, link_problems = texts_for(request)
    state = page_state(request.query_params.multi_items())
    return build_view(texts, state.get("what_if") or None, link_problems)


@router.get("/", response_class=HTMLResponse)
def sheet(request: Request) -> HTMLResponse:
    """The design sheet; the query string is a share link (``?topology=...&L=47u&...``)."""
    view = _view(request)
    return templates.TemplateResponse(request, "sheet.html", page_context(request, view))


@router.get("/sheet.json")
def sheet_json(request: Request) -> dict[str, Any]:
    """The sheet's data for the same query (its JSON twin)."""
    return _view(request)


@router.get("/summary", response_class=HTMLResponse)
async def summary(request: Request) -> HTMLResponse:
    """One-page printable summary of the design in the query.

    Its spread is the last one computed for this design (the sheet's spread
    panel), else a small one run in a worker; when the workers are busy the
    summary goes without it and says so."""
    view = await run_in_threadpool(_view, request)
    context = page_context(request, view)
    context["today"] = date.today().isoformat()
    texts = {name: f["text"] for name, f in view["fields"].items()}
    context["spread"], context["spread_busy"] = (
        await _spread(request, texts) if view["ok"] else (None, False)
    )
    context["run"] = _finished_run(request, view)
    return templates.TemplateResponse(request, "summary.html", context)


async def _spread(request: Request, texts: dict[str, str]) -> tuple[dict[str, Any] | None, bool]:
    """The summary's spread section, and whether it is missing for want of a worker."""
    spread = last_spread(request.app, texts)
    if spread is None:
        try:
            spread = await work_of(request.app).run(
                request, "spread", summary_small_spread, texts, with_progress=False
            )
        except ApiError as err:
            if err.status not in (429, 503):
                raise
            return None, True
    return summary_spread(texts, spread), False


def _finished_run(request: Request, view: dict[str, Any]) -> dict[str, Any] | None:
    """What the sheet showed of the time-domain run named by ``run`` in the query, if
    that run is still kept, finished, and ran this very design."""
    run_id = page_state(request.query_params.multi_items()).get("run")
    if not (run_id and view["ok"]):
        return None
    try:
        job = work_of(request.app).get(run_id, kind="simulate")
    except ApiError:
        return None  # forgotten: the summary goes without it
    if job.state != "done" or job.result is None:
        return None
    if job.request.design != Design.model_validate(view["design"]):
        return None
    return {**run_view(job.result), "cycles": job.request.cycles}


@router.get("/summary.json")
def summary_json(request: Request) -> dict[str, Any]:
    """The summary's data for the same query (its JSON twin)."""
    return _view(request)
