"""One error shape for every API error, and the handlers that produce it.

Every error answer of the API, whatever its cause, has exactly this body::

    {"status": 422, "error": "invalid-input",
     "message": "tank.C2: must be greater than 0, got '-1'",
     "problems": [{"field": "tank.C2", "message": "must be ...", "type": "greater_than"}]}

``problems`` uses :func:`ringwise.errors.describe_validation_error`'s shape, so a
field is named by its dotted path in the request body.  Domain errors of the
core (``ValueError`` and ``ArithmeticError`` subclasses such as ``UnitError``,
``ParameterError`` or a DC solve that does not converge) are input the user
can change, so they answer 422, never 500.
"""

from __future__ import annotations

import logging
from http import HTTPStatus
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from pydantic import ValidationError
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.routing import Match

from ringwise.errors import describe_validation_error, domain_message

log = logging.getLogger("ringwise.web")

#: Machine-readable names of the HTTP statuses the API answers with.
ERROR_NAMES = {
    400: "bad-request",
    404: "not-found",
    403: "forbidden",
    405: "method-not-allowed",
    408: "request-timeout",
    413: "too-large",
    422: "invalid-input",
    429: "too-many-requests",
    500: "internal-error",
    503: "busy",
}


class ApiError(Exception):
    """An error answer: status, summary message and field-named problems."""

    def __init__(
        self,
        status: int,
        message: str,
        problems: list[dict] | None = None,
        headers: dict[str, str] | None = None,
    ) -> None:
        super().__init__(message)
        self.status = status
        self.message = message
        self.problems = problems or []
        self.headers = headers

    def __reduce__(self) -> tuple[Any, ...]:
        # raised in a worker process, it crosses back to the server pickled
        return (type(self), (self.status, self.message, self.problems, self.headers))


def invalid(field: str, message: str, kind: str = "value_error") -> ApiError:
    """A 422 naming one field."""
    return ApiError(422, f"{field}: {message}", [problem(field, message, kind)])


def problem(field: str, message: str, kind: str) -> dict[str, str]:
    return {"field": field, "message": message, "type": kind}


def from_validation(err: ValidationError, prefix: tuple[str, ...] = ()) -> ApiError:
    """A 422 from a pydantic ``ValidationError`` raised while validating a request part."""
    return _from_problems(describe_validation_error(err, prefix))


def _from_problems(problems: list[dict]) -> ApiError:
    first = problems[0] if problems else problem("request", "is not valid", "value_error")
    more = f" (and {len(problems) - 1} more)" if len(problems) > 1 else ""
    return ApiError(422, f"{first['field']}: {first['message']}{more}", problems)


def error_body(status: int, message: str, problems: list[dict]) -> dict[str, Any]:
    return {
        "status": status,
        "error": ERROR_NAMES.get(status, HTTPStatus(status).phrase.lower().replace(" ", "-")),
        "message": message,
        "problems": problems,
    }


def _respond(err: ApiError, headers: dict[str, str] | None = None) -> JSONResponse:
    return JSONResponse(
        error_body(err.status, err.message, err.problems), status_code=err.status, headers=headers
    )


class _RequestErrors:
    """Lets :func:`describe_validation_error` read FastAPI's request errors."""

    def __init__(self, errors: list[dict]) -> None:
        self._errors = errors

    def errors(self, include_url: bool = False) -> list[dict]:
        out = []
        for e in self._errors:
            loc = tuple(e.get("loc", ()))
            if loc and loc[0] in ("body", "query", "path"):
                loc = loc[1:]
            out.append({**e, "loc": loc})
        return out


def _request_problems(exc: RequestValidationError) -> list[dict]:
    problems = describe_validation_error(_RequestErrors(list(exc.errors())))  # type: ignore[arg-type]
    for p in problems:
        if p["type"] == "json_invalid":
            p["field"] = "body"
            p["message"] = "is not valid JSON"
        elif p["field"] in ("design", "req") and p["type"] in ("missing", "model_attributes_type"):
            p["field"] = "body"
            p["message"] = "must be a JSON object sent as application/json"
    return problems


#: Methods probed when a 405 lists what the path allows.
_METHODS = ("GET", "HEAD", "POST", "PUT", "PATCH", "DELETE")


def _methods_at(request: Request) -> list[str]:
    """The methods some route of the app answers at the request's path."""
    found = []
    for method in _METHODS:
        probe = {**request.scope, "method": method}
        if any(route.matches(probe)[0] == Match.FULL for route in request.app.router.routes):
            found.append(method)
    if "GET" in found and "HEAD" not in found:
        found.insert(found.index("GET") + 1, "HEAD")  # answered as GET (app/web/methods.py)
    return found


def install(app: FastAPI) -> None:
    """Register the handlers that give every error the one shape."""

    @app.exception_handler(ApiError)
    async def _api_error(request: Request, exc: ApiError) -> JSONResponse:
        return _respond(exc, exc.headers)

    @app.exception_handler(RequestValidationError)
    async def _request_invalid(request: Request, exc: RequestValidationError) -> JSONResponse:
        return _respond(_from_problems(_request_problems(exc)))

    @app.exception_handler(ValidationError)
    async def _model_invalid(request: Request, exc: ValidationError) -> JSONResponse:
        # request bodies are validated by FastAPI (RequestValidationError) and routes turn the
        # user's own texts into field-named problems; one left uncaught came from the core
        return _respond(invalid("design", domain_message(exc), "domain_error"))

    @app.exception_handler(ValueError)
    @app.exception_handler(ArithmeticError)
    async def _domain(request: Request, exc: Exception) -> JSONResponse:
        return _respond(invalid("design", domain_message(exc), "domain_error"))

    @app.exception_handler(StarletteHTTPException)
    async def _http(request: Request, exc: StarletteHTTPException) -> JSONResponse:
        detail = exc.detail if isinstance(exc.detail, str) else HTTPStatus(exc.status_code).phrase
        if exc.status_code == 404 and detail == "Not Found":
            detail = f"nothing here: {request.url.path}"
        if exc.status_code == 400 and isinstance(exc.__cause__, UnicodeDecodeError):
            # bytes that are not UTF-8 are not JSON either: the same answer as bad JSON
            return _respond(invalid("body", "is not valid JSON (not UTF-8 text)", "json_invalid"))
        headers = dict(getattr(exc, "headers", None) or {})
        if exc.status_code == 405:
            # Allow lists the methods of every route at this path, not only the first one's
            headers["Allow"] = ", ".join(_methods_at(request) or [headers.get("Allow", "")])
        problems = [problem("body", detail, "too_large")] if exc.status_code == 413 else []
        return _respond(ApiError(exc.status_code, detail, problems), headers)

    @app.exception_handler(Exception)
    async def _bug(request: Request, exc: Exception) -> JSONResponse:  # pragma: no cover
        log.exception("unexpected error answering %s", request.url.path)
        return _respond(ApiError(500, "unexpected server error; please report it"))
