"""The pages: the design sheet and its one-page printed summary, with JSON twins."""

from __future__ import annotations

from datetime import date
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse

from ringwise.web.dependencies import texts_for
from ringwise.web.plotsvg import loop_plot
from ringwise.web.templating import page_context, templates
from ringwise.web.tools import summary_spread
from ringwise.web.view import build_view

router = APIRouter(tags=["pages"])


def _view(request: Request) -> dict[str, Any]:
    texts, link_problems = texts_for(request)
    return build_view(texts, None, link_problems)


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
def summary(request: Request) -> HTMLResponse:
    """One-page printable summary of the design in the query."""
    view = _view(request)
    context = page_context(request, view)
    context["today"] = date.today().isoformat()
    context["plot"] = loop_plot(view["curves"]["loop"]) if view["ok"] else None
    texts = {name: f["text"] for name, f in view["fields"].items()}
    context["spread"] = summary_spread(texts) if view["ok"] else None
    return templates.TemplateResponse(request, "summary.html", context)


@router.get("/summary.json")
def summary_json(request: Request) -> dict[str, Any]:
    """The summary's data for the same query (its JSON twin)."""
    return _view(request)
