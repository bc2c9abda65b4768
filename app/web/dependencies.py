"""Request-level helpers shared by the routers."""

from __future__ import annotations

from typing import Any

from fastapi import Request, Response

from ringwise.web.errors import ApiError
from ringwise.web.fields import BY_NAME, FIELDS, from_query
from ringwise.web.samples import DEFAULT_SAMPLE, OPENED_DESIGN, sample_texts

#: The error answers every JSON route documents.
ERRORS: dict[int | str, dict[str, Any]] = {
    422: {"description": "Invalid input: every problem names its field"},
}


def default_sample(request: Request) -> str:
    """The sample the sheet opens on (``ringwise serve --design``)."""
    return getattr(request.app.state, "default_design", None) or DEFAULT_SAMPLE


def texts_for(request: Request) -> tuple[dict[str, str], list[dict]]:
    """Form texts and link problems for the request's query string (a share link)."""
    known = sample_texts()
    opened = getattr(request.app.state, "opened_texts", None)
    if opened is not None:  # ringwise serve DESIGN.json
        known = {**known, OPENED_DESIGN: opened}
    return from_query(request.query_params.multi_items(), known, default_sample(request))


def form_texts(fields: dict[str, str]) -> dict[str, str]:
    """Every form field's text (blank where not given); an unknown field name is a 422."""
    unknown = [k for k in fields if k not in BY_NAME]
    if unknown:
        raise ApiError(
            422,
            f"fields.{unknown[0]}: is not a design field",
            [
                {
                    "field": f"fields.{k}",
                    "message": "is not a design field",
                    "type": "extra_forbidden",
                }
                for k in unknown
            ],
        )
    return {f.name: fields.get(f.name, "") for f in FIELDS}


def csv_response(text: str, filename: str) -> Response:
    """A CSV answer (RFC 4180, UTF-8) the browser saves as ``filename``."""
    return Response(
        text,
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": f'attachment; filename="{filename}"'},
    )
