"""Request-level helpers shared by the routers."""

from __future__ import annotations

from fastapi import Request

from ringwise.web.fields import from_query
from ringwise.web.samples import DEFAULT_SAMPLE, sample_texts


def default_sample(request: Request) -> str:
    """The sample the sheet opens on (``ringwise serve --design``)."""
    return getattr(request.app.state, "default_design", None) or DEFAULT_SAMPLE


def texts_for(request: Request) -> tuple[dict[str, str], list[dict]]:
    """Form texts and link problems for the request's query string (a share link)."""
    return from_query(request.query_params.multi_items(), sample_texts(), default_sample(request))
