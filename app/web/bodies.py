"""Request bodies, read under guard: size cap, slow-body timeout, bounded JSON.

:class:`BodyGuard` is an ASGI middleware that reads every request body itself
before the app sees it, and refuses at once, in the API's one error shape:

* a body over :data:`MAX_BODY_BYTES` (413; a declared ``Content-Length`` over
  the cap is refused unread, a chunked body as soon as it passes the cap);
* a body that has not fully arrived :data:`BODY_SECONDS` after the request
  began (408): a client trickling bytes cannot hold a connection and a
  worker thread for long;
* a JSON body (``application/json`` or ``+json``) that is not JSON (400,
  saying where parsing stopped: line, column, character), nested deeper
  than :data:`MAX_DEPTH`, or holding a number literal of more than
  :data:`~ringwise.units.MAX_DIGITS` digits or ``NaN``/``Infinity`` (422,
  naming the field where it was written, ``tank.C2``).

All of this is linear in the body: the standard library's JSON scanner reads
it once (its number literals are handed over as text, so a 60 000-digit
integer is measured, never converted — Python's conversion is quadratic in
the digits), and the tree is walked once.  A body that passes is handed to
the app as read; after it, the app receives the client's own messages, so a
disconnect still reaches the route (see :mod:`ringwise.web.workers`).
"""

from __future__ import annotations

import asyncio
import email.message
import json
from typing import Any, Final

from starlette.responses import JSONResponse
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from ringwise.units import MAX_DIGITS
from ringwise.web import errors

#: Largest request body the server reads, bytes.  A design file or a sheet
#: request is 1-2 kB (the design name is at most 200 characters); 64 KiB
#: leaves ample room while a runaway upload is refused before it is read into
#: memory (common practice, no source).
MAX_BODY_BYTES: Final = 64 * 1024
TOO_LARGE: Final = f"the request body is over the cap of {MAX_BODY_BYTES} bytes (MAX_BODY_BYTES)"
#: Time a request body may take to arrive in full, s.  64 KiB over loopback
#: takes microseconds, over a slow link well under a second (common practice,
#: no source).
BODY_SECONDS: Final = 10.0
TOO_SLOW: Final = f"the request body did not arrive within {BODY_SECONDS:g} s (BODY_SECONDS)"
#: Deepest nesting of objects and arrays in a JSON body.  A design file is 3
#: levels deep, a request wrapping one 4 (common practice, no source).
MAX_DEPTH: Final = 32
#: Methods whose body is read.
_WITH_BODY: Final = frozenset({"POST", "PUT", "PATCH", "DELETE"})


class _Long:
    """A JSON number literal too long to convert: only its length is kept."""

    def __init__(self, digits: int) -> None:
        self.digits = digits


class _Constant:
    """``NaN``, ``Infinity`` or ``-Infinity``, which JSON does not have."""

    def __init__(self, name: str) -> None:
        self.name = name


def _number(kind: type) -> Any:
    def convert(text: str) -> Any:
        return _Long(len(text)) if len(text) > MAX_DIGITS else kind(text)

    return convert


def _pairs(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    """An object, keeping a refused literal even when its key is repeated later
    (the app's own parse keeps the last value and would meet the literal)."""
    out: dict[str, Any] = {}
    for key, value in pairs:
        if not isinstance(out.get(key), _Long | _Constant):
            out[key] = value
    return out


def _path(keys: tuple[Any, ...]) -> str:
    return ".".join(str(k) for k in keys) or "body"


def _walk(value: Any) -> errors.ApiError | None:
    """The first literal or nesting the body may not hold, as an error naming its field."""
    stack: list[tuple[Any, tuple[Any, ...]]] = [(value, ())]
    while stack:
        node, keys = stack.pop()
        if isinstance(node, _Long):
            return errors.invalid(
                _path(keys),
                f"a number of {node.digits} characters is too long; "
                f"a number has at most {MAX_DIGITS} digits",
                "too_long",
            )
        if isinstance(node, _Constant):
            return errors.invalid(
                _path(keys), f"{node.name} is not a finite number (not JSON)", "finite_number"
            )
        if isinstance(node, dict | list):
            if len(keys) >= MAX_DEPTH:
                return errors.invalid(
                    _path(keys[:MAX_DEPTH]),
                    f"is nested deeper than {MAX_DEPTH} levels of objects and arrays",
                    "too_deep",
                )
            items = node.items() if isinstance(node, dict) else enumerate(node)
            stack.extend((child, (*keys, key)) for key, child in items)
    return None


def check_json(body: bytes) -> errors.ApiError | None:
    """Why ``body`` may not go on as a JSON request, or ``None`` when it may."""
    try:
        text = body.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        return errors.ApiError(
            400,
            f"body: is not JSON: byte {err.start} is not UTF-8 text",
            [errors.problem("body", f"is not JSON: byte {err.start} is not UTF-8", "json_invalid")],
        )
    try:
        value = json.loads(
            text,
            parse_int=_number(int),
            parse_float=_number(float),
            parse_constant=_Constant,
            object_pairs_hook=_pairs,
        )
    except json.JSONDecodeError as err:
        where = f"line {err.lineno}, column {err.colno} (character {err.pos})"
        message = f"is not valid JSON: {err.msg.lower()} at {where}"
        return errors.ApiError(
            400, f"body: {message}", [errors.problem("body", message, "json_invalid")]
        )
    except RecursionError:
        message = f"is nested deeper than {MAX_DEPTH} levels of objects and arrays"
        return errors.ApiError(
            422, f"body: {message}", [errors.problem("body", message, "too_deep")]
        )
    return _walk(value)


def _is_json(scope: Scope) -> bool:
    content_type = dict(scope["headers"]).get(b"content-type")
    if content_type is None:
        return False
    message = email.message.Message()
    message["content-type"] = content_type.decode("latin-1")
    subtype = message.get_content_subtype()
    return message.get_content_maintype() == "application" and (
        subtype == "json" or subtype.endswith("+json")
    )


class BodyGuard:
    """Read, cap, time and check every request body before the app sees it (module doc)."""

    def __init__(
        self, app: ASGIApp, limit: int = MAX_BODY_BYTES, seconds: float = BODY_SECONDS
    ) -> None:
        self.app = app
        self.limit = limit
        self.seconds = seconds

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http" or scope["method"] not in _WITH_BODY:
            await self.app(scope, receive, send)
            return
        declared = dict(scope["headers"]).get(b"content-length")
        if declared is not None and (not declared.isdigit() or int(declared) > self.limit):
            await _refuse(errors.ApiError(413, TOO_LARGE, [_too_large()]), scope, receive, send)
            return
        try:
            body = await asyncio.wait_for(self._read(receive), self.seconds)
        except TimeoutError:
            refusal = errors.ApiError(408, TOO_SLOW, [errors.problem("body", TOO_SLOW, "timeout")])
            await _refuse(refusal, scope, receive, send)
            return
        except _DisconnectedError:
            return
        if body is None:
            await _refuse(errors.ApiError(413, TOO_LARGE, [_too_large()]), scope, receive, send)
            return
        if body and _is_json(scope):
            refusal = check_json(body)
            if refusal is not None:
                await _refuse(refusal, scope, receive, send)
                return
        replayed = False

        async def replay() -> Message:
            nonlocal replayed
            if not replayed:
                replayed = True
                return {"type": "http.request", "body": body, "more_body": False}
            return await receive()

        await self.app(scope, replay, send)

    async def _read(self, receive: Receive) -> bytes | None:
        """The whole body, or ``None`` as soon as it passes the cap."""
        chunks: list[bytes] = []
        seen = 0
        while True:
            message = await receive()
            if message["type"] == "http.disconnect":
                raise _DisconnectedError
            chunk = message.get("body", b"")
            seen += len(chunk)
            if seen > self.limit:
                return None
            chunks.append(chunk)
            if not message.get("more_body", False):
                return b"".join(chunks)


class _DisconnectedError(Exception):
    """The client went away before its body arrived: nothing to answer."""


def _too_large() -> dict[str, str]:
    return errors.problem("body", TOO_LARGE, "too_large")


async def _refuse(err: errors.ApiError, scope: Scope, receive: Receive, send: Send) -> None:
    # the connection is closed after a refusal whose body was not read to its end
    response = JSONResponse(
        errors.error_body(err.status, err.message, err.problems),
        status_code=err.status,
        headers={"Connection": "close"} if err.status in (408, 413) else None,
    )
    await response(scope, receive, send)
