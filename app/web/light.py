"""The light computations: their worker processes, and their admission.

The sheet's answers (analysis, the sheet's view, the what-if sweep, the steady
state, snapping, a threshold) take tens of milliseconds of CPU each (a full
``POST /api/analyze`` of a design not seen before about 40–60 ms, one with a
varactor about 270 ms).  Computed in the server's own process they all run on
one core, under one interpreter lock shared with the event loop, which then
answers even a refusal late.  So the analysis runs in a small pool of light
worker processes (:class:`Light`, :data:`LIGHT_WORKERS`: one per core), at the
normal priority, above the heavy workers (app/web/workers.py, idle class):
light work uses every core, and the event loop stays free to read requests,
refuse, answer polls and files.  Each light worker keeps the core's memories
(the last analyses, the last steady-state orbit of each circuit layout for a
warm start), so an edit that moves a part a little starts from the orbit of
the edit before.

Admission: at most :data:`LIGHT_LIMIT` light requests are outstanding
(computing or waiting for a light worker); one more is answered 503 with
``Retry-After`` at once, from the event loop, before its body is read
(:class:`LightLimit`).  The limit is sized from the measured capacity: about
:data:`QUEUE_S` of queued work for the light workers at :data:`ANSWER_S` an
answer, so 20 people editing at once are never refused, and a flood waits at
most about that long or is refused at once.  The light routes that still
compute in the server's own threads (the sheet's views, the pages) have a
limit of their own, :data:`LOCAL_LIMIT`: more of them at once would only
lengthen the queue for the one interpreter lock the event loop needs too.
"""

from __future__ import annotations

import asyncio
import contextlib
import gc
import json
import logging
import multiprocessing
import os
import threading
from collections.abc import Callable
from concurrent.futures import Executor, Future, ProcessPoolExecutor, ThreadPoolExecutor
from concurrent.futures.process import BrokenProcessPool
from typing import Any, Final

from fastapi import Response
from pydantic import BaseModel
from starlette.responses import JSONResponse
from starlette.types import ASGIApp, Receive, Scope, Send

from ringwise.web import errors
from ringwise.web.workers import INLINE, PRELOAD, START_METHOD, failure, fork_server, watch

log = logging.getLogger("ringwise.web")


def _start(server: int) -> None:
    """Light worker process start: watch the server, yield to its event loop."""
    watch(server)
    with contextlib.suppress(OSError):
        os.nice(LIGHT_NICE)


#: Light worker processes: one per core, at most four.
LIGHT_WORKERS: Final = max(1, min(4, os.cpu_count() or 1))
#: Niceness added to the light workers: the server's event loop, which admits,
#: refuses and answers, wakes ahead of them when the cores are full, so a refusal
#: stays immediate under a flood (the heavy workers sit lower still, idle class).
LIGHT_NICE: Final = 2
#: CPU time of one light answer, s: a full analysis of a sample design not seen
#: before, measured on the 2-core development machine (40–60 ms; ``make load``).
ANSWER_S: Final = 0.06
#: Queued light work the limit allows, s of the light workers' time.
QUEUE_S: Final = 1.0
#: Light requests outstanding at most (computing or waiting for a light worker):
#: about 33 with two workers.
LIGHT_LIMIT: Final = max(8, round(LIGHT_WORKERS * QUEUE_S / ANSWER_S))
#: The light paths computed in the light workers; the others compute in the
#: server's own threads, under the interpreter lock the event loop needs.
POOLED_PATHS: Final = frozenset({"/api/analyze"})
#: Light computations at once in the server's own threads: a few per core keeps
#: both busy while the event loop still gets the interpreter lock often
#: (common practice, no source).
LOCAL_LIMIT: Final = 8
#: ``Retry-After`` of a refusal, s: a light answer takes well under a second.
RETRY_AFTER_S: Final = 1
#: The paths that compute (in the server's process or a light worker), exact, and prefixes.
LIGHT_PATHS: Final = frozenset(
    {
        "/",
        "/sheet.json",
        "/summary.json",
        "/api/analyze",
        "/api/threshold",
        "/api/snap",
        "/api/sheet",
        "/api/sheet/steady",
        "/api/sheet/sweep",
        "/api/sheet/snap",
    }
)
LIGHT_PREFIXES: Final = ("/api/csv/sheet/",)
BUSY: Final = (
    "the server is busy: {limit} answers are being computed or waiting already; "
    f"try again in {RETRY_AFTER_S} s"
)
#: The design each light worker analyses once when it starts (its caches warm).
WARM_SAMPLE: Final = "clapp-clock-1M"


def is_light(path: str) -> bool:
    return path in LIGHT_PATHS or path.startswith(LIGHT_PREFIXES)


def _busy(message: str) -> errors.ApiError:
    return errors.ApiError(
        503,
        message,
        [errors.problem("request", message, "busy")],
        {"Retry-After": str(RETRY_AFTER_S)},
    )


class LightLimit:
    """At most ``limit`` light requests for the light workers at once, and
    ``local_limit`` computed in the server's own threads; past either 503 at
    once (module doc)."""

    def __init__(
        self, app: ASGIApp, limit: int = LIGHT_LIMIT, local_limit: int = LOCAL_LIMIT
    ) -> None:
        self.app = app
        self.limits = {"pooled": limit, "local": local_limit}
        self.running = {"pooled": 0, "local": 0}  # touched on the event loop only

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http" or not is_light(scope["path"]):
            await self.app(scope, receive, send)
            return
        group = "pooled" if scope["path"] in POOLED_PATHS else "local"
        if self.running[group] >= self.limits[group]:
            err = _busy(BUSY.format(limit=self.limits[group]))
            body = errors.error_body(err.status, err.message, err.problems)
            response = JSONResponse(body, status_code=err.status, headers=err.headers)
            await response(scope, receive, send)
            return
        self.running[group] += 1
        try:
            await self.app(scope, receive, send)
        finally:
            self.running[group] -= 1


# ---- in the light worker ----------------------------------------------------------


def as_json(fn: Callable[..., Any], args: tuple) -> tuple[bool, Any]:
    """``fn(*args)`` as JSON text (a model by its own serializer, else ``json``),
    or the error body it ended with: ``(True, text)`` or ``(False, body)``.

    What crosses back to the server is a string or a plain dict, never an
    exception object that might not unpickle there."""
    try:
        result = fn(*args)
        if isinstance(result, BaseModel):
            return True, result.model_dump_json()
        return True, json.dumps(result, ensure_ascii=False, allow_nan=False)
    except Exception as err:  # answered with its status: 422 for a domain error
        return False, failure(err, "the analysis")


def _warm() -> int:
    """A light worker's start: one analysis, so the first request finds it warm."""
    from ringwise.analysis.analyze import analyze
    from ringwise.design import Design
    from ringwise.web.samples import samples

    with contextlib.suppress(Exception):
        analyze(Design.model_validate(samples()[WARM_SAMPLE].document))
    # Everything imported and warmed so far lives as long as the worker: kept
    # out of the collector's full passes, which would otherwise walk it (some
    # 175 000 objects, about 0.1 s) in the middle of a request now and then.
    gc.freeze()
    return os.getpid()


# ---- in the server ----------------------------------------------------------------


class Light:
    """The light worker processes of one app (threads of its own process when the
    app runs without its lifespan, as the heavy work does: :data:`INLINE`)."""

    def __init__(self, mode: str = INLINE, workers: int = LIGHT_WORKERS) -> None:
        self.mode = mode
        self.workers = workers
        self._lock = threading.Lock()
        self._executor: Executor | None = None
        #: The pool's processes are up (a submit no longer forks one).
        self._ready = False

    def start(self, mode: str = "process") -> None:
        """Use worker processes from now on (the app's lifespan); they start in the
        background, warm, so the first light request does not wait for them."""
        with self._lock:
            if self.mode == mode:
                return
            self.mode = mode
            old, self._executor = self._executor, None
        if old is not None:
            old.shutdown(wait=False)
        if mode == "process":
            threading.Thread(target=self._warm_up, daemon=True, name="ringwise-light").start()

    def _warm_up(self) -> None:
        fork_server()
        with contextlib.suppress(RuntimeError):
            for _ in range(self.workers):
                self._submit(_warm)
            # every worker is forked now: a submit no longer waits for one
            self._ready = True

    def _make(self) -> Executor:
        if self.mode == "process":
            ctx = multiprocessing.get_context(START_METHOD)
            if START_METHOD == "forkserver":
                ctx.set_forkserver_preload(list(PRELOAD))
            return ProcessPoolExecutor(
                self.workers, mp_context=ctx, initializer=_start, initargs=(os.getpid(),)
            )
        return ThreadPoolExecutor(self.workers, thread_name_prefix="ringwise-light")

    def _submit(self, fn: Callable[..., Any], *args: Any) -> Future:
        with self._lock:
            if self._executor is None:
                self._executor = self._make()
            try:
                return self._executor.submit(fn, *args)
            except BrokenProcessPool:  # a light worker died (killed from outside)
                self._ready = False  # the fresh pool forks its workers on demand
                broken, self._executor = self._executor, self._make()
                broken.shutdown(wait=False)
                return self._executor.submit(fn, *args)

    def shutdown(self) -> None:
        with self._lock:
            executor, self._executor = self._executor, None
        if executor is not None:
            executor.shutdown(wait=False, cancel_futures=True)

    async def json(self, fn: Callable[..., Any], *args: Any) -> Response:
        """``fn(*args)`` computed in a light worker, answered as JSON; its error as
        the one error shape (422 for a domain error, as in the server's process)."""
        try:
            if self._ready:  # the workers are up: a submit only queues the call
                future = self._submit(as_json, fn, args)
            else:  # off the event loop: a worker that is not there yet is forked first
                future = await asyncio.to_thread(self._submit, as_json, fn, args)
            ok, out = await asyncio.wrap_future(future)
        except BrokenProcessPool as err:
            raise _busy("a light worker process ended before it answered; try again") from err
        except RuntimeError as err:  # the pool is shutting down
            raise _busy("the server is stopping") from err
        if not ok:
            headers = {"Retry-After": str(RETRY_AFTER_S)} if out["status"] in (429, 503) else None
            raise errors.ApiError(out["status"], out["message"], out["problems"], headers)
        return Response(out, media_type="application/json")


def light_of(app: Any) -> Light:
    """The app's light workers (made with the app; they start in the lifespan)."""
    return app.state.light
