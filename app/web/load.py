"""Load benchmark of the sheet's server (``make load``); a benchmark, never a test.

Starts the app under uvicorn, in a process of its own, on a free port of
127.0.0.1 (loopback only; stopped at the end), and runs two scenarios, each
stopping by itself (a deadline and a request cap; every request has a
timeout):

* **goal** — :data:`GOAL_LIGHT` light clients, each sending ``POST
  /api/analyze`` then pausing :data:`THINK_S` (a person editing the sheet:
  an edit, a look at the answer), while :data:`GOAL_HEAVY` heavy clients
  keep one heavy request each running all the time (a Monte Carlo spread and
  a time-domain run, alternately).  The target: analyze p99 below
  :data:`P99_TARGET`.
* **flood** — :data:`DEFAULT_CLIENTS` light clients sending analyze one after
  another without a pause (a closed loop: with many more clients than cores
  the latency is mostly queueing; by Little's law latency ≈ clients /
  throughput), while :data:`FLOOD_HEAVY` heavy clients send spreads, runs
  and sweeps.  The target: no errors (a timeout, a reset connection, any
  5xx), the heavy requests past their kind's limit refused with 429 at
  once (their latency reported), the refused clients waiting as
  ``Retry-After`` says.

Prints, per scenario, requests per second, p50/p99 of analyze, each heavy
kind's answers, the refusals and their p99 latency, and the errors.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import socket
import statistics
import subprocess
import sys
import threading
import time
from dataclasses import dataclass, field
from typing import Any, Final

from ringwise.units import parse_quantity
from ringwise.web.light import LIGHT_WORKERS
from ringwise.web.paths import SAMPLES_DIR

DEFAULT_CLIENTS: Final = 200
DEFAULT_SECONDS: Final = 30.0
#: Hard cap on requests in one run, whatever the duration.
DEFAULT_MAX_REQUESTS: Final = 200_000
#: No request may take longer than this, s.
REQUEST_TIMEOUT: Final = 60.0
#: The goal scenario: light clients, their pause between edits (s), heavy jobs running.
GOAL_LIGHT: Final = 20
THINK_S: Final = 1.0
GOAL_HEAVY: Final = 2
GOAL_SECONDS: Final = 20.0
#: The flood scenario's heavy clients (more than the limits admit).
FLOOD_HEAVY: Final = 8
#: The heavy requests: a long sweep, a transient (the sheet's defaults), a spread.
HEAVY_SWEEP_POINTS: Final = 200
HEAVY_CYCLES: Final = 300
HEAVY_POINTS: Final = 2000
HEAVY_SAMPLES: Final = 20_000
#: The targets of issue 15 for analyze while heavy work runs, s.
P99_TARGET: Final = 0.150
SAMPLE: Final = "clapp-clock-1M"
#: Statuses that are answers, not errors: 200, and 429/503 (refused, with Retry-After).
REFUSED: Final = (429, 503)


@dataclass
class Stats:
    """What one run measured."""

    seconds: float = 0.0
    latencies: dict[str, list[float]] = field(default_factory=dict)
    errors: dict[str, int] = field(default_factory=dict)
    refusals: list[float] = field(default_factory=list)

    def add(self, kind: str, latency: float) -> None:
        self.latencies.setdefault(kind, []).append(latency)

    def error(self, what: str) -> None:
        self.errors[what] = self.errors.get(what, 0) + 1

    @property
    def requests(self) -> int:
        answered = sum(len(v) for v in self.latencies.values())
        return answered + len(self.refusals) + self.error_count

    @property
    def error_count(self) -> int:
        return sum(self.errors.values())

    def percentile(self, kind: str, q: float) -> float | None:
        return _percentile(self.latencies.get(kind, []), q)

    def summary(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "seconds": round(self.seconds, 2),
            "requests": self.requests,
            "requests_per_s": round(self.requests / self.seconds, 1) if self.seconds else 0.0,
            "errors": self.error_count,
            "error_kinds": dict(self.errors),
            "refused": len(self.refusals),
            "refused_p99_ms": _ms(_percentile(self.refusals, 99)),
        }
        for kind, values in sorted(self.latencies.items()):
            out[kind] = {
                "count": len(values),
                "p50_ms": _ms(self.percentile(kind, 50)),
                "p99_ms": _ms(self.percentile(kind, 99)),
                "mean_ms": _ms(statistics.fmean(values)),
            }
        return out


def _percentile(values: list[float], q: float) -> float | None:
    if not values:
        return None
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, round(q / 100 * (len(ordered) - 1)))]


def _ms(seconds: float | None) -> float | None:
    return None if seconds is None else round(1000 * seconds, 1)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class _Server:
    """The app under uvicorn on 127.0.0.1, in a process of its own (so the load
    generator does not share its interpreter lock), stopped on exit."""

    def __init__(self) -> None:
        self.port = _free_port()
        self.command = [
            sys.executable,
            "-m",
            "uvicorn",
            "ringwise.web.server:create_app",
            "--factory",
            "--host",
            "127.0.0.1",
            "--port",
            str(self.port),
            "--log-level",
            "warning",
            "--backlog",
            "4096",
        ]
        self.process: subprocess.Popen | None = None

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def __enter__(self) -> _Server:
        self.process = subprocess.Popen(self.command)
        deadline = time.monotonic() + 30
        while True:
            if self.process.poll() is not None:
                raise RuntimeError(f"the server exited with status {self.process.returncode}")
            try:
                socket.create_connection(("127.0.0.1", self.port), timeout=0.5).close()
                return self
            except OSError:
                if time.monotonic() > deadline:
                    self.__exit__()
                    raise RuntimeError("the server did not start within 30 s") from None
                time.sleep(0.05)

    def __exit__(self, *exc: object) -> None:
        if self.process is not None and self.process.poll() is None:
            self.process.terminate()
            try:
                self.process.wait(timeout=15)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait(timeout=5)


async def _one(client: Any, stats: Stats, kind: str, path: str, body: dict) -> float:
    """One request; the seconds a refused one asks the client to wait (else 0)."""
    t0 = time.perf_counter()
    try:
        r = await client.post(path, json=body)
    except Exception as err:  # a timeout, a refused or reset connection: all errors
        stats.error(f"{kind}: {type(err).__name__}")
        return 0.0
    latency = time.perf_counter() - t0
    if r.status_code == 200:
        stats.add(kind, latency)
    elif r.status_code in REFUSED and "retry-after" in r.headers:
        stats.refusals.append(latency)
        return float(r.headers["retry-after"])
    else:
        stats.error(f"{kind}: HTTP {r.status_code}")
    return 0.0


async def _run(
    url: str,
    clients: int,
    seconds: float,
    max_requests: int,
    heavy: int,
    think: float,
) -> Stats:
    import httpx2 as httpx

    design = json.loads((SAMPLES_DIR / f"{SAMPLE}.json").read_text(encoding="utf-8"))
    base_RC = parse_quantity(design["bias"]["RC"], "Ω")
    spread = {"design": design, "samples": HEAVY_SAMPLES, "seed": 1}
    simulate = {"design": design, "cycles": HEAVY_CYCLES, "points": HEAVY_POINTS}
    sweep = {"design": design, "param": "RC", "start": 10, "stop": 1e4}
    sweep["points"] = HEAVY_SWEEP_POINTS
    heavy_requests = [
        ("spread", "/api/spread", spread),
        ("simulate", "/api/simulate", simulate),
        ("sweep", "/api/sweep", sweep),
    ]
    stats = Stats()
    sent = 0
    limits = httpx.Limits(
        max_connections=clients + heavy + 2, max_keepalive_connections=clients + heavy + 2
    )
    start = time.perf_counter()
    deadline = start + seconds

    def more() -> bool:
        nonlocal sent
        if time.perf_counter() >= deadline or sent >= max_requests:
            return False
        sent += 1
        return True

    async def pause(s: float) -> None:
        await asyncio.sleep(max(0.0, min(s, deadline - time.perf_counter())))

    async with httpx.AsyncClient(base_url=url, limits=limits, timeout=REQUEST_TIMEOUT) as client:

        async def light(i: int) -> None:
            if think:
                await pause(think * i / clients)  # the edits spread over the pause
            while more():
                # Every request a design not seen before (RC moved a little), as
                # many users editing would send: the server's memory of recent
                # analyses must not flatter the figures.
                edited = json.loads(json.dumps(design))
                edited["bias"]["RC"] = base_RC * (1.0 + 1e-4 * sent)
                wait = await _one(client, stats, "analyze", "/api/analyze", edited)
                await pause(max(wait, think))

        async def heavy_client(i: int) -> None:
            # the goal's two clients take different kinds, so both run at once
            k = i
            while more():
                kind, path, body = heavy_requests[k % (2 if heavy <= 2 else 3)]
                await pause(await _one(client, stats, kind, path, body))
                k += 1

        tasks = [light(i) for i in range(clients)] + [heavy_client(i) for i in range(heavy)]
        await asyncio.gather(*tasks)
    stats.seconds = time.perf_counter() - start
    return stats


# ---- memory of the server and its worker processes (Linux's /proc) -----------------

#: How often the memory is sampled during a run, s.
MEMORY_EVERY_S: Final = 0.25
#: The longest wait for the light workers to be up before a run, s.
SETTLE_S: Final = 20.0
#: When the memory is measured again after a run, s.
AFTER_S: Final = 2.0
_PAGE: Final = os.sysconf("SC_PAGE_SIZE") if hasattr(os, "sysconf") else 4096
_TICKS: Final = os.sysconf("SC_CLK_TCK") if hasattr(os, "sysconf") else 100


def _stat(pid: int) -> list[str] | None:
    """A process's ``/proc/PID/stat`` fields from the third on, or None if it is gone."""
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as f:
            text = f.read()
    except OSError:
        return None
    return text[text.rindex(")") + 2 :].split()  # (the name may hold spaces)


def _rss(pid: int) -> int:
    """Resident memory of a process, bytes (0 if it is gone)."""
    try:
        with open(f"/proc/{pid}/statm", encoding="ascii") as f:
            return int(f.read().split()[1]) * _PAGE
    except (OSError, IndexError, ValueError):
        return 0


def _cpu(pid: int) -> float:
    """CPU time a process has used, s (0 if it is gone)."""
    fields = _stat(pid)
    return (int(fields[11]) + int(fields[12])) / _TICKS if fields else 0.0


def workers(server: int) -> list[int] | None:
    """The worker processes of the server (its fork server's children); None
    without Linux's /proc."""
    if not os.path.isdir("/proc/self/task"):
        return None
    parents = {}
    for name in os.listdir("/proc"):
        if name.isdigit() and (fields := _stat(int(name))) is not None:
            parents[int(name)] = int(fields[1])
    children = {pid for pid, ppid in parents.items() if ppid == server}
    return [pid for pid, ppid in parents.items() if ppid in children]


class _Memory:
    """RSS of the server and its workers, sampled in a thread during a run: before,
    peak (the largest total, and the largest single process) and after.  The
    light workers are the ones up before the run (they start warm and stay);
    every other worker is a heavy one (each ends after its piece of work)."""

    def __init__(self, server: int) -> None:
        self.server = server
        self.light = set(workers(server) or ())
        self.cpu_before = {pid: _cpu(pid) for pid in self.light}
        self.server_cpu_before = _cpu(server)
        self.cpu: dict[str, float] = {}
        self.before = self._measure()
        self.peak: dict[str, int] = {}
        self.after: dict[str, list[int]] | None = None
        self._done = threading.Event()
        self._thread = threading.Thread(target=self._sample, daemon=True, name="load-memory")

    def _measure(self) -> dict[str, list[int]] | None:
        found = workers(self.server)
        if found is None:
            return None
        out: dict[str, list[int]] = {"server": [_rss(self.server)], "heavy": [], "light": []}
        for pid in found:
            out["light" if pid in self.light else "heavy"].append(_rss(pid))
        return out

    def _sample(self) -> None:
        while not self._done.wait(MEMORY_EVERY_S):
            for group, values in (self._measure() or {}).items():
                self.peak[group] = max(self.peak.get(group, 0), sum(values))
                one = max(values, default=0)
                self.peak[group + "_one"] = max(self.peak.get(group + "_one", 0), one)

    def __enter__(self) -> _Memory:
        self._thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self._done.set()
        self._thread.join()
        self.cpu["light"] = sum(_cpu(pid) - cpu for pid, cpu in self.cpu_before.items())
        self.cpu["server"] = _cpu(self.server) - self.server_cpu_before
        # every request has its answer by now; a heavy worker ends after its piece
        # of work (app/web/workers.py): what is held a moment later
        time.sleep(AFTER_S)
        self.after = self._measure()

    def figures(self) -> dict[str, Any]:
        if self.before is None or self.after is None:
            return {}
        out: dict[str, Any] = {}
        for group in ("server", "heavy", "light"):
            out[group] = {
                "processes": [len(self.before[group]), len(self.after[group])],
                "before_mb": _mb(sum(self.before[group])),
                "peak_mb": _mb(self.peak.get(group, 0)),
                "peak_one_mb": _mb(self.peak.get(group + "_one", 0)),
                "after_mb": _mb(sum(self.after[group])),
            }
        return out


def _mb(n: int) -> float:
    return round(n / 2**20, 1)


def _wait_for_light(server: int) -> None:
    """Until the server's light workers are up (they start warm, in the background)."""
    deadline = time.monotonic() + SETTLE_S
    while time.monotonic() < deadline:
        found = workers(server)
        if found is None or len(found) >= LIGHT_WORKERS:
            return
        time.sleep(0.2)


def run(
    clients: int = DEFAULT_CLIENTS,
    seconds: float = DEFAULT_SECONDS,
    max_requests: int = DEFAULT_MAX_REQUESTS,
    heavy: int = FLOOD_HEAVY,
    think: float = 0.0,
) -> dict[str, Any]:
    """Serve the app on a free loopback port, load it, stop it; the figures as a dict."""
    out: list[Stats] = []
    with _Server() as server:
        assert server.process is not None
        _wait_for_light(server.process.pid)
        load_before = _loadavg()
        # a thread of its own, so it also runs where an event loop is already running
        worker = threading.Thread(
            target=lambda: out.append(
                asyncio.run(_run(server.url, clients, seconds, max_requests, heavy, think))
            ),
            name="load-clients",
        )
        client_cpu = time.process_time()
        with _Memory(server.process.pid) as sampled:
            worker.start()
            worker.join()
            client_cpu = time.process_time() - client_cpu
    if not out:
        raise RuntimeError("the load run failed (see the traceback above)")
    figures = out[0].summary()
    figures["memory"] = sampled.figures()
    answered = figures.get("analyze", {}).get("count", 0)
    if sampled.cpu and answered:
        figures["light_cpu_ms"] = round(1000 * sampled.cpu["light"] / answered, 1)
    if sampled.cpu and figures["requests"]:
        figures["server_cpu_ms"] = round(1000 * sampled.cpu["server"] / figures["requests"], 2)
        figures["client_cpu_ms"] = round(1000 * client_cpu / figures["requests"], 2)
    figures["load_average"] = [load_before, _loadavg()]
    return figures


def _loadavg() -> float | None:
    """The machine's 1-minute load average (other work on it shows in the figures)."""
    try:
        return round(os.getloadavg()[0], 2)
    except (OSError, AttributeError):
        return None


def report(
    figures: dict[str, Any], clients: int, heavy: int = FLOOD_HEAVY, think: float = 0.0
) -> str:
    analyze = figures.get("analyze", {})
    pace = f"a {think:g} s pause after each answer" if think else "no pause (closed loop)"
    lines = [
        f"ringwise load: {clients} analyze clients ({pace}) + {heavy} heavy clients "
        f"(spread {HEAVY_SAMPLES} samples / simulate {HEAVY_CYCLES} cycles"
        + (f" / sweep {HEAVY_SWEEP_POINTS} points" if heavy > 2 else "")
        + f"), {figures['seconds']} s, 127.0.0.1",
        f"  requests      {figures['requests']}  ({figures['requests_per_s']} /s)",
        f"  analyze       {analyze.get('count', 0)} answered, p50 {analyze.get('p50_ms')} ms, "
        f"p99 {analyze.get('p99_ms')} ms  (target p99 < {P99_TARGET * 1000:.0f} ms)",
    ]
    for kind in ("spread", "simulate", "sweep"):
        if kind in figures:
            f = figures[kind]
            lines.append(f"  {kind:<13} {f['count']} answered, p50 {f['p50_ms']} ms")
    lines.append(
        f"  refused       {figures['refused']} (429/503 with Retry-After), "
        f"p99 {figures['refused_p99_ms']} ms"
    )
    lines.append(f"  errors        {figures['errors']}  {figures['error_kinds'] or ''}".rstrip())
    for group, m in figures.get("memory", {}).items():
        before, after = m["processes"]
        lines.append(
            f"  RSS {group:<9} before {m['before_mb']} MB ({before}), peak {m['peak_mb']} MB "
            f"(one process {m['peak_one_mb']} MB), after {m['after_mb']} MB ({after})"
        )
    if figures.get("light_cpu_ms"):
        lines.append(
            f"  light CPU     {figures['light_cpu_ms']} ms per analyze answered "
            "(the light workers' CPU time over the run)"
        )
    if figures.get("server_cpu_ms"):
        lines.append(
            f"  server CPU    {figures['server_cpu_ms']} ms per request (answered or refused; "
            "the server process's CPU time over the run); the load generator's "
            f"{figures.get('client_cpu_ms')} ms"
        )
    if figures.get("load_average"):
        start, end = figures["load_average"]
        lines.append(f"  machine load  {start} at the start, {end} at the end (1-minute average)")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(
        prog="python -m ringwise.web.load", description=__doc__.splitlines()[0]
    )
    p.add_argument(
        "--scenario",
        choices=("both", "goal", "flood"),
        default="both",
        help="goal: 20 light clients pausing between edits, 2 heavy jobs always running; "
        "flood: 200 closed-loop clients and more heavy requests than admitted",
    )
    p.add_argument("--clients", type=int, default=None, help="light clients (overrides)")
    p.add_argument(
        "--heavy", type=int, default=None, help="heavy clients (overrides; 0 for light work alone)"
    )
    p.add_argument("--seconds", type=float, default=None)
    p.add_argument("--max-requests", type=int, default=DEFAULT_MAX_REQUESTS)
    p.add_argument("--json", action="store_true", help="print the figures as JSON")
    args = p.parse_args(argv)
    plans = {
        "goal": (GOAL_LIGHT, GOAL_SECONDS, GOAL_HEAVY, THINK_S),
        "flood": (DEFAULT_CLIENTS, DEFAULT_SECONDS, FLOOD_HEAVY, 0.0),
    }
    chosen = ("goal", "flood") if args.scenario == "both" else (args.scenario,)
    results = {}
    for name in chosen:
        clients, seconds, heavy, think = plans[name]
        clients = args.clients or clients
        heavy = heavy if args.heavy is None else args.heavy
        seconds = args.seconds or seconds
        figures = run(clients, seconds, args.max_requests, heavy, think)
        results[name] = figures
        if not args.json:
            print(f"[{name}] " + report(figures, clients, heavy, think), flush=True)
    if args.json:
        print(json.dumps(results, indent=2))
    return 0


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
