"""Heavy work off the server's interpreter: worker processes, admission, progress, stop.

The analyses are CPU-bound Python; in the server's own process a Monte
Carlo run or a long transient holds the interpreter lock and every light
answer (an edit of the sheet) waits behind it.  So the heavy kinds of work
(:data:`LIMITS`: spread, time-domain run, bench fit, synthesis, sweeps over a
size, the summary's spread) run in a pool of worker processes
(:class:`concurrent.futures.ProcessPoolExecutor`), each started by the
``forkserver`` method (never ``fork``: the server has threads) with the
package imported once in the fork server, and running under Linux's idle
scheduling class (``SCHED_IDLE``; elsewhere at :data:`WORKER_NICE`), so heavy
work only gets the CPU time the light answers leave (app/web/light.py).

Memory: a worker whose peak memory grew by more than :data:`RENEW_BYTES`
during its work (a large spread, a long run) ends once its work is done: the
pool it belongs to is let go and the next piece of work starts a fresh one,
forked from the fork server, so what the big request allocated goes back to
the system whatever the allocator keeps.  Workers that did small pieces of
work stay, warm (a fresh process per piece of work measured about twice the
light answers' latency in ``make load``, and four times the spread's).

Admission: each kind has at most :data:`LIMITS` requests outstanding
(running or waiting for a worker); one more is refused at once with 429
and ``Retry-After`` (:class:`BusyError`), never queued without bound.  The
caps of each request (samples, cycles, points) bound its memory; a spread
works in chunks (``CHUNK_SAMPLES``) and keeps only its figures.

Progress and stop: every piece of work gets a slot in two shared arrays
(made before the workers start, inherited by them): the fraction done,
written by the core's progress callback in the worker, and a stop flag,
read by that callback (``False`` back to the core stops it at its next
report, keeping what it computed where that means something: a stopped
spread answers with the samples done).  A request whose client goes away
is stopped the same way (:meth:`Work.run` watches the connection), and a
job is stopped by ``DELETE /api/jobs/{id}`` (app/web/routers/jobs.py).

The pool is made in the app's lifespan (app/web/server.py) and shut down at
its end.  An app used without its lifespan (an in-process test client)
runs the same work, with the same admission, progress and stop, in
threads of its own process instead (:data:`INLINE`).
"""

from __future__ import annotations

import asyncio
import contextlib
import logging
import multiprocessing
import os
import secrets
import threading
import time
from collections.abc import Callable
from concurrent.futures import Executor, Future, ProcessPoolExecutor, ThreadPoolExecutor
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field
from functools import partial
from typing import Any, Final, Literal

from fastapi import Request

from ringwise.analysis.transient import SimulationCancelledError
from ringwise.errors import domain_message
from ringwise.web.errors import ApiError, error_body, problem

log = logging.getLogger("ringwise.web")

#: Worker processes: one per core, at most four (the work is one core's each).
WORKERS: Final = max(1, min(4, os.cpu_count() or 1))
#: Niceness of the worker processes where the idle scheduling class is not
#: available (POSIX ``nice``, the lowest priority): heavy work takes the CPU the
#: light answers leave (common practice for background work, no source).
WORKER_NICE: Final = 19
#: A worker whose peak resident memory grew by more than this during its work
#: ends after it, bytes (a 20 000-sample spread grows a worker by about 20 MB, a
#: 100 000-sample one or a 20 000-cycle run by hundreds).  (Not the pool's
#: ``max_tasks_per_child``: above one it can stall Python 3.11–3.13's pool,
#: CPython issue gh-115634, and at one every piece of work pays a cold start.)
RENEW_BYTES: Final = 64 * 2**20
#: How worker processes start: ``forkserver`` forks them from a clean
#: single-threaded server process that has the package imported already
#: (``fork`` from the threaded server could copy a held lock; ``spawn``
#: would import numpy and scipy again for each worker).
START_METHOD: Final = "forkserver"
#: How often a worker process checks that its server is still there, s.
WATCH_S: Final = 1.0
#: Imported once in the fork server, so a worker starts warm (ringwise.web.preload:
#: the package, and the compiled kernels loaded).
PRELOAD: Final = ("ringwise.web.preload",)
#: Requests of each kind outstanding at most (running or waiting for a worker);
#: the next one is refused with 429 at once.  Two of a kind keep both cores busy,
#: and one more of some kinds may wait its turn.
LIMITS: Final[dict[str, int]] = {
    "spread": 3,
    "simulate": 2,
    "reconcile": 2,
    "synthesize": 2,
    "sweep": 3,
}
Kind = Literal["spread", "simulate", "reconcile", "synthesize", "sweep"]
#: Shared progress slots: one per request that may be outstanding.
SLOTS: Final = sum(LIMITS.values())
#: ``Retry-After`` of a refusal, s: about one heavy request's time on this machine.
RETRY_AFTER_S: Final = 5
#: How long ``DELETE`` of a job waits for the worker to hand back what it has, s.
STOP_WAIT_S: Final = 5.0
#: Jobs remembered at most (running and ended); the oldest ended go first.
MAX_KEPT: Final = 16
#: An ended job is forgotten this long after it ended, s.
KEEP_SECONDS: Final = 600.0
#: Run in threads instead (an app used without its lifespan, see the module doc).
INLINE: Final = "inline"

State = Literal["queued", "running", "done", "cancelled", "failed"]
#: The core's progress callback: the fraction done in, ``False`` back to stop.
Progress = Callable[[float], bool]


class BusyError(ApiError):
    """Too many requests of one kind outstanding: 429 with ``Retry-After``."""

    def __init__(self, kind: str) -> None:
        limit = LIMITS[kind]
        message = (
            f"the server is busy: {limit} {kind} requests are running or waiting already "
            f"(at most {limit}); try again in {RETRY_AFTER_S} s, or stop one"
        )
        super().__init__(
            429,
            message,
            [problem("request", message, "busy")],
            {"Retry-After": str(RETRY_AFTER_S)},
        )

    def __reduce__(self) -> tuple[Any, ...]:
        return (ApiError, (self.status, self.message, self.problems, self.headers))


class StoppedError(Exception):
    """The work was stopped before it began, or before it had anything to show."""


# ---- in the worker ----------------------------------------------------------------

_shared: dict[str, Any] = {}


def _init(progress: Any, stop: Any, nice: int, server: int) -> None:
    """Worker process start: keep the shared arrays, watch the server, lower the priority."""
    _shared["progress"], _shared["stop"] = progress, stop
    _shared["rss"] = resident()
    watch(server)
    background(nice)


def watch(server: int) -> None:
    """End this worker process when the server process ``server`` is gone.

    A pool's workers end when the server lets the pool go; a server killed
    before that (or ended while they still run) would leave them waiting for
    work forever, each holding its memory (and the fork server with them,
    whose liveness pipe they hold)."""

    def check() -> None:
        while not gone(server):
            time.sleep(WATCH_S)
        os._exit(0)

    threading.Thread(target=check, daemon=True, name="ringwise-watch").start()


def gone(pid: int) -> bool:
    """Whether process ``pid`` has ended: no such process, or one that has exited and
    waits for its parent to collect it (a zombie, which still answers a signal; its
    parent may be waiting for our end first, for the pipes we share with it)."""
    if os.path.isdir("/proc/self"):
        try:
            with open(f"/proc/{pid}/stat", encoding="ascii") as f:
                return f.read().rpartition(")")[2].split()[0] in ("Z", "X")
        except FileNotFoundError:
            return True
        except (OSError, IndexError):
            pass
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return True
    except OSError:  # there, but not ours to signal
        pass
    return False


def background(nice: int = WORKER_NICE) -> str:
    """Put every thread of this process in the idle scheduling class (Linux's
    ``SCHED_IDLE``: it runs only when nothing else wants the CPU), or where that
    is not available lower its priority by ``nice``; which one it got."""
    threads = [0]
    with contextlib.suppress(OSError):  # Linux: a thread's scheduling is its own
        threads = [int(t) for t in os.listdir("/proc/self/task")]
    try:
        for tid in threads:
            os.sched_setscheduler(tid, os.SCHED_IDLE, os.sched_param(0))
        return "idle"
    except (OSError, AttributeError):
        with contextlib.suppress(OSError, AttributeError):
            for tid in threads:
                os.setpriority(
                    os.PRIO_PROCESS, tid, min(19, os.getpriority(os.PRIO_PROCESS, tid) + nice)
                )
        return "nice"


def _call(
    slot: int,
    fn: Callable[..., Any],
    args: tuple,
    kwargs: dict[str, Any],
    with_progress: bool,
    arrays: tuple[Any, Any] | None = None,
) -> tuple[Any, bool, int]:
    """``fn(*args, **kwargs)`` in a worker (or a thread), reporting into ``slot``;
    with whether it was asked to stop (its result is then what it had) and how
    much the worker's peak memory has grown since it started, bytes."""
    progress_of, stop = arrays or (_shared["progress"], _shared["stop"])
    if stop[slot]:
        raise StoppedError("stopped before it began")
    asked = False

    def progress(fraction: float) -> bool:
        nonlocal asked
        progress_of[slot] = max(progress_of[slot], min(1.0, float(fraction)))
        asked = asked or bool(stop[slot])
        return not asked

    if with_progress:
        kwargs = {**kwargs, "progress": progress}
    result = fn(*args, **kwargs)
    start = _shared.get("rss", 0) if arrays is None else 0
    grown = peak_resident() - start if start else 0
    return result, asked, grown


def resident() -> int:
    """This process's resident memory now, bytes (0 where unknown)."""
    try:
        with open("/proc/self/statm", encoding="ascii") as f:
            return int(f.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError, AttributeError):
        return 0


def peak_resident() -> int:
    """This process's peak resident memory so far, bytes (0 where unknown)."""
    try:
        import resource

        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # KiB on Linux
    except (ImportError, OSError):
        return 0


# ---- in the server ----------------------------------------------------------------


def fork_server() -> None:
    """Start the fork server with the package imported (once per server process)."""
    ctx = multiprocessing.get_context("forkserver")
    ctx.set_forkserver_preload(list(PRELOAD))
    from multiprocessing import forkserver

    with contextlib.suppress(OSError, RuntimeError):
        forkserver.ensure_running()


def failure(err: BaseException, what: str = "the computation") -> dict[str, Any]:
    """The error body an ended piece of work reports (domain errors are the user's to fix)."""
    if isinstance(err, ApiError):
        return error_body(err.status, err.message, err.problems)
    if isinstance(err, BrokenProcessPool):  # its worker was killed (out of memory?)
        message = f"the worker process of {what} ended before it answered; try again"
        return error_body(503, message, [problem("request", message, "busy")])
    if isinstance(err, ValueError | ArithmeticError):
        message = domain_message(err)
        return error_body(422, f"design: {message}", [problem("design", message, "domain_error")])
    log.error("%s failed", what, exc_info=err)
    return error_body(500, f"unexpected error in {what}; please report it", [])


@dataclass
class Job:
    """One piece of heavy work: a request waiting for its answer, or a kept job."""

    id: str
    kind: str
    slot: int
    #: What the job was started with (the summary checks a run's design by it).
    request: Any = None
    #: Turns the worker's result into what the job keeps (in the server, on its end).
    finish: Callable[[Any], Any] | None = None
    kept: bool = False
    state: State = "queued"
    progress: float = 0.0
    result: Any = None
    error: dict[str, Any] | None = None
    started: float = field(default_factory=time.monotonic)
    ended: float | None = None
    stop_asked: bool = False
    future: Future | None = None
    #: The executor it runs in (let go after it if the work grew its worker).
    executor: Executor | None = None
    #: The shared progress and stop arrays of the executor it runs in.
    arrays: tuple[Any, Any] = ((), ())
    finished: threading.Event = field(default_factory=threading.Event)

    def out(self) -> dict[str, Any]:
        """The job as ``GET /api/jobs/{id}`` shows it."""
        body: dict[str, Any] = {
            "id": self.id,
            "kind": self.kind,
            "state": self.state,
            "progress": self.progress,
        }
        if self.result is not None and self.state in ("done", "cancelled"):
            body["result"] = self.result
        if self.state == "failed":
            body["error"] = self.error
        return body


class Work:
    """The heavy work of one app: its executor, admission counts, slots and kept jobs."""

    def __init__(self, mode: str = INLINE, workers: int = WORKERS) -> None:
        self.mode = mode
        self.workers = workers
        self._lock = threading.Lock()
        self._executor: Executor | None = None
        self._progress: Any = None
        self._stop: Any = None
        self._free = list(range(SLOTS))
        self._outstanding: dict[str, int] = dict.fromkeys(LIMITS, 0)
        self._jobs: dict[str, Job] = {}

    # -- the executor

    def start(self, mode: str = "process") -> None:
        """Use worker processes from now on (the app's lifespan).  The pool's
        processes start with the first piece of work, forked from the fork
        server that has the package imported already, so they start warm."""
        with self._lock:
            if self.mode == mode:
                return
            self.mode = mode
            old, self._executor = self._executor, None
        if old is not None:  # work already running in threads finishes there
            old.shutdown(wait=False)
        if mode == "process" and START_METHOD == "forkserver":
            # the fork server imports the package once, in the background, so that
            # the first heavy request does not wait for it
            threading.Thread(target=fork_server, daemon=True, name="ringwise-forkserver").start()

    def _make(self) -> None:
        if self.mode == "process":
            ctx = multiprocessing.get_context(START_METHOD)
            if START_METHOD == "forkserver":
                ctx.set_forkserver_preload(list(PRELOAD))
            self._progress = ctx.RawArray("d", SLOTS)
            self._stop = ctx.RawArray("b", SLOTS)
            self._executor = ProcessPoolExecutor(
                self.workers,
                mp_context=ctx,
                initializer=_init,
                initargs=(self._progress, self._stop, WORKER_NICE, os.getpid()),
            )
        else:
            self._progress = [0.0] * SLOTS
            self._stop = [0] * SLOTS
            self._executor = ThreadPoolExecutor(self.workers, thread_name_prefix="ringwise-work")

    def shutdown(self) -> None:
        """Stop everything and let the workers go (the app's lifespan ends); work
        submitted later starts a new executor of the same mode."""
        with self._lock:
            executor, self._executor = self._executor, None
            if self._stop is not None:
                for i in range(SLOTS):
                    self._stop[i] = 1
        if executor is not None:
            executor.shutdown(wait=False, cancel_futures=True)

    # -- submitting

    def submit(
        self,
        kind: str,
        fn: Callable[..., Any],
        *args: Any,
        with_progress: bool = True,
        keep: bool = False,
        request: Any = None,
        finish: Callable[[Any], Any] | None = None,
        **kwargs: Any,
    ) -> Job:
        """Start ``fn(*args, **kwargs)`` in a worker, or refuse at once (:class:`BusyError`).

        ``with_progress`` passes the core a ``progress`` callback; ``keep``
        remembers the job for ``GET /api/jobs/{id}``; ``finish`` turns its
        result into what the job keeps."""
        with self._lock:
            if self._outstanding[kind] >= LIMITS[kind]:
                raise BusyError(kind)
            if self._executor is None:
                self._make()
            self._outstanding[kind] += 1
            slot = self._free.pop()
            self._progress[slot] = 0.0
            self._stop[slot] = 0
            job = Job(
                arrays=(self._progress, self._stop),
                id=secrets.token_urlsafe(18),
                kind=kind,
                slot=slot,
                request=request,
                finish=finish,
                kept=keep,
            )
            if keep:
                self._prune()
                self._jobs[job.id] = job
            arrays = None if self.mode == "process" else (self._progress, self._stop)
            try:
                job.future = self._submit(slot, fn, args, kwargs, with_progress, arrays)
                job.executor = self._executor
                job.arrays = (self._progress, self._stop)  # a fresh pool's, if it was made
            except RuntimeError as err:  # the executor is shutting down
                self._outstanding[kind] -= 1
                self._free.append(slot)
                self._jobs.pop(job.id, None)
                raise ApiError(503, "the server is stopping", headers={"Retry-After": "1"}) from err
        job.future.add_done_callback(lambda f: self._ended(job, f))
        return job

    def _submit(self, *call: Any) -> Future:
        """``_call(*call)`` in the executor; a pool broken by a worker that died
        (killed from outside) is replaced by a fresh one first."""
        try:
            return self._executor.submit(_call, *call)  # type: ignore[union-attr]
        except BrokenProcessPool:
            broken = self._executor
            self._make()
            broken.shutdown(wait=False)  # type: ignore[union-attr]
            return self._executor.submit(_call, *call)  # type: ignore[union-attr]

    def _renew(self, executor: Executor | None) -> None:
        """Let ``executor`` go after a piece of work that grew its worker: the work it
        still runs finishes there, its workers end, and the next piece of work
        starts a fresh pool (module doc)."""
        with self._lock:
            if executor is None or executor is not self._executor:
                return  # let go already
            self._executor = None
        executor.shutdown(wait=False)

    def _ended(self, job: Job, future: Future) -> None:
        """A piece of work ended: free its slot, keep its result or its error."""
        result: Any = None
        error: dict[str, Any] | None = None
        state: State
        if future.cancelled():
            state = "cancelled"
        elif (err := future.exception()) is not None:
            if isinstance(err, StoppedError | SimulationCancelledError):
                state = "cancelled"
            else:
                state, error = "failed", failure(err, f"the {job.kind}")
        else:
            value, asked, grown = future.result()
            if grown > RENEW_BYTES:
                self._renew(job.executor)
            state = "cancelled" if asked else "done"
            try:
                result = job.finish(value) if job.finish else value
            except Exception as finish_err:  # reported as the job's error
                state, error = "failed", failure(finish_err, f"the {job.kind}")
        with self._lock:
            job.progress = max(job.progress, float(job.arrays[0][job.slot]))
            if state == "done":
                job.progress = 1.0
            job.state, job.result, job.error = state, result, error
            job.ended = time.monotonic()
            self._outstanding[job.kind] -= 1
            self._free.append(job.slot)
        job.finished.set()

    # -- reading and stopping

    def refresh(self, job: Job) -> Job:
        """``job`` with its progress and state as of now."""
        with self._lock:
            if job.ended is None:
                job.progress = max(job.progress, float(job.arrays[0][job.slot]))
                if job.state == "queued" and (job.progress > 0 or job.future.running()):  # type: ignore[union-attr]
                    job.state = "running"
        return job

    def get(self, job_id: str, kind: str | None = None) -> Job:
        with self._lock:
            self._prune()
            job = self._jobs.get(job_id)
        if job is None or (kind is not None and job.kind != kind):
            raise ApiError(404, "no job with that id (it may have ended long ago and been dropped)")
        return self.refresh(job)

    def stop(self, job: Job) -> None:
        """Ask ``job`` to stop: at once if it waits, else at its next progress report."""
        with self._lock:
            if job.ended is not None:
                return
            job.stop_asked = True
            job.arrays[1][job.slot] = 1
        if job.future is not None:
            job.future.cancel()

    async def stopped(self, job: Job, wait: float = STOP_WAIT_S) -> Job:
        """Stop ``job`` and wait (up to ``wait`` s) for what it hands back."""
        self.stop(job)
        await asyncio.to_thread(job.finished.wait, wait)
        return self.refresh(job)

    def jobs(self) -> list[Job]:
        with self._lock:
            return list(self._jobs.values())

    def _prune(self) -> None:
        """Forget jobs ended too long ago, then the oldest ended ones beyond the cap."""
        now = time.monotonic()
        for key, job in list(self._jobs.items()):
            if job.ended is not None and now - job.ended > KEEP_SECONDS:
                del self._jobs[key]
        ended = [k for k, j in self._jobs.items() if j.ended is not None]
        for key in ended[: max(0, len(self._jobs) - MAX_KEPT + 1)]:
            del self._jobs[key]

    # -- a request that waits for its answer

    async def run(
        self,
        request: Request,
        kind: str,
        fn: Callable[..., Any],
        *args: Any,
        with_progress: bool = True,
        **kwargs: Any,
    ) -> Any:
        """``fn(*args, **kwargs)`` in a worker for a request that waits for the answer;
        stopped if the client goes away.  Raises the work's error as an ``ApiError``."""
        # off the event loop: the first pieces of work start the worker processes
        job = await asyncio.to_thread(
            partial(self.submit, kind, fn, *args, with_progress=with_progress, **kwargs)
        )
        waiter = asyncio.wrap_future(job.future)  # type: ignore[arg-type]
        waiter.add_done_callback(_consume)
        watcher = asyncio.ensure_future(_gone(request))
        try:
            await asyncio.wait({waiter, watcher}, return_when=asyncio.FIRST_COMPLETED)
            if not waiter.done():
                self.stop(job)
                raise ApiError(
                    503,
                    "the client went away; the work was stopped",
                    headers={"Retry-After": str(RETRY_AFTER_S)},
                )
        finally:
            watcher.cancel()
            if not waiter.done():
                self.stop(job)
        with contextlib.suppress(BaseException):
            waiter.result()  # consumed; the job holds the outcome
        await asyncio.to_thread(job.finished.wait, STOP_WAIT_S)
        if job.state == "failed":
            e = job.error or {}
            status = e.get("status", 500)
            retry = {"Retry-After": str(RETRY_AFTER_S)} if status in (429, 503) else None
            raise ApiError(status, e.get("message", ""), e.get("problems"), retry)
        if job.result is None:
            raise ApiError(
                503,
                "the work was stopped before it had an answer",
                headers={"Retry-After": str(RETRY_AFTER_S)},
            )
        return job.result


def _consume(future: asyncio.Future) -> None:
    """Take a waiter's outcome (the job keeps it), so asyncio does not report it unread."""
    if not future.cancelled():
        future.exception()


async def _gone(request: Request) -> None:
    """Returns when the client of ``request`` goes away (its body is read already, so
    the next message is the disconnect; an in-process test client sends it only
    after the answer, when this waiter has been cancelled)."""
    while (await request.receive())["type"] != "http.disconnect":
        pass


def work_of(app: Any) -> Work:
    """The app's heavy work (made with the app; its pool starts in the lifespan)."""
    return app.state.work
