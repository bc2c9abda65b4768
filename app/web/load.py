"""Load benchmark of the sheet's server (``make load``); a benchmark, never a test.

Starts the app under uvicorn, in a process of its own, on a free port of
127.0.0.1 (loopback only; stopped at the end),
then runs ``clients`` concurrent clients, each sending ``POST /api/analyze``
one after another for ``seconds``, while one heavy client alternates a
sweep of :data:`HEAVY_SWEEP_POINTS` points and a transient of
:data:`HEAVY_CYCLES` cycles.  It stops by itself: at the deadline, or
after ``max_requests`` requests, and every request has a timeout.  Prints
requests per second, p50/p99 latency of analyze, and the error count.

Each client waits for its answer before it sends the next request (a closed
loop), so with many more clients than cores the latency is mostly queueing:
by Little's law, latency ≈ clients / throughput.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import socket
import statistics
import subprocess
import sys
import threading
import time
from dataclasses import dataclass, field
from typing import Any, Final

from ringwise.units import parse_quantity
from ringwise.web.paths import SAMPLES_DIR

DEFAULT_CLIENTS: Final = 200
DEFAULT_SECONDS: Final = 30.0
#: Hard cap on requests in one run, whatever the duration.
DEFAULT_MAX_REQUESTS: Final = 200_000
#: No request may take longer than this, s.
REQUEST_TIMEOUT: Final = 60.0
#: The heavy requests mixed in: a long sweep and a transient (the sheet's own defaults).
HEAVY_SWEEP_POINTS: Final = 200
HEAVY_CYCLES: Final = 300
HEAVY_POINTS: Final = 2000
#: The target of issue 7 for analyze while heavy requests run, s.
P99_TARGET: Final = 0.200
SAMPLE: Final = "clapp-clock-1M"


@dataclass
class Stats:
    """What one run measured."""

    seconds: float = 0.0
    latencies: dict[str, list[float]] = field(default_factory=dict)
    errors: dict[str, int] = field(default_factory=dict)

    def add(self, kind: str, latency: float) -> None:
        self.latencies.setdefault(kind, []).append(latency)

    def error(self, what: str) -> None:
        self.errors[what] = self.errors.get(what, 0) + 1

    @property
    def requests(self) -> int:
        return sum(len(v) for v in self.latencies.values()) + self.error_count

    @property
    def error_count(self) -> int:
        return sum(self.errors.values())

    def percentile(self, kind: str, q: float) -> float | None:
        values = sorted(self.latencies.get(kind, []))
        if not values:
            return None
        return values[min(len(values) - 1, round(q / 100 * (len(values) - 1)))]

    def summary(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "seconds": round(self.seconds, 2),
            "requests": self.requests,
            "requests_per_s": round(self.requests / self.seconds, 1) if self.seconds else 0.0,
            "errors": self.error_count,
            "error_kinds": dict(self.errors),
        }
        for kind, values in sorted(self.latencies.items()):
            out[kind] = {
                "count": len(values),
                "p50_ms": _ms(self.percentile(kind, 50)),
                "p99_ms": _ms(self.percentile(kind, 99)),
                "mean_ms": _ms(statistics.fmean(values)),
            }
        return out


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


async def _one(client: Any, stats: Stats, kind: str, path: str, body: dict) -> None:
    t0 = time.perf_counter()
    try:
        r = await client.post(path, json=body)
    except Exception as err:  # a timeout, a refused or reset connection: all errors
        stats.error(f"{kind}: {type(err).__name__}")
        return
    if r.status_code == 200:
        stats.add(kind, time.perf_counter() - t0)
    else:
        stats.error(f"{kind}: HTTP {r.status_code}")


async def _run(url: str, clients: int, seconds: float, max_requests: int, heavy: bool) -> Stats:
    import httpx2 as httpx

    design = json.loads((SAMPLES_DIR / f"{SAMPLE}.json").read_text(encoding="utf-8"))
    base_RC = parse_quantity(design["bias"]["RC"], "Ω")
    sweep = {"design": design, "param": "RC", "start": 10, "stop": 1e4}
    sweep["points"] = HEAVY_SWEEP_POINTS
    simulate = {"design": design, "cycles": HEAVY_CYCLES, "points": HEAVY_POINTS}
    stats = Stats()
    sent = 0
    limits = httpx.Limits(max_connections=clients + 2, max_keepalive_connections=clients + 2)
    start = time.perf_counter()
    deadline = start + seconds

    def more() -> bool:
        nonlocal sent
        if time.perf_counter() >= deadline or sent >= max_requests:
            return False
        sent += 1
        return True

    async with httpx.AsyncClient(base_url=url, limits=limits, timeout=REQUEST_TIMEOUT) as client:

        async def light() -> None:
            while more():
                # Every request a design not seen before (RC moved a little), as
                # many users editing would send: the server's memory of recent
                # analyses must not flatter the figures.
                edited = json.loads(json.dumps(design))
                edited["bias"]["RC"] = base_RC * (1.0 + 1e-4 * sent)
                await _one(client, stats, "analyze", "/api/analyze", edited)

        async def heavy_client() -> None:
            while more():
                await _one(client, stats, "sweep", "/api/sweep", sweep)
                if more():
                    await _one(client, stats, "simulate", "/api/simulate", simulate)

        tasks = [light() for _ in range(clients)] + ([heavy_client()] if heavy else [])
        await asyncio.gather(*tasks)
    stats.seconds = time.perf_counter() - start
    return stats


def run(
    clients: int = DEFAULT_CLIENTS,
    seconds: float = DEFAULT_SECONDS,
    max_requests: int = DEFAULT_MAX_REQUESTS,
    heavy: bool = True,
) -> dict[str, Any]:
    """Serve the app on a free loopback port, load it, stop it; the figures as a dict."""
    out: list[Stats] = []
    with _Server() as server:
        # a thread of its own, so it also runs where an event loop is already running
        worker = threading.Thread(
            target=lambda: out.append(
                asyncio.run(_run(server.url, clients, seconds, max_requests, heavy))
            ),
            name="load-clients",
        )
        worker.start()
        worker.join()
    if not out:
        raise RuntimeError("the load run failed (see the traceback above)")
    return out[0].summary()


def report(figures: dict[str, Any], clients: int) -> str:
    analyze = figures.get("analyze", {})
    lines = [
        f"ringwise load: {clients} analyze clients + 1 heavy client (sweep "
        f"{HEAVY_SWEEP_POINTS} points / simulate {HEAVY_CYCLES} cycles), {figures['seconds']} s, "
        "127.0.0.1",
        f"  requests      {figures['requests']}  ({figures['requests_per_s']} /s)",
        f"  analyze       {analyze.get('count', 0)} answered, p50 {analyze.get('p50_ms')} ms, "
        f"p99 {analyze.get('p99_ms')} ms  (target p99 < {P99_TARGET * 1000:.0f} ms)",
    ]
    for kind in ("sweep", "simulate"):
        if kind in figures:
            f = figures[kind]
            lines.append(f"  {kind:<13} {f['count']} answered, p50 {f['p50_ms']} ms")
    lines.append(f"  errors        {figures['errors']}  {figures['error_kinds'] or ''}".rstrip())
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(
        prog="python -m ringwise.web.load", description=__doc__.splitlines()[0]
    )
    p.add_argument("--clients", type=int, default=DEFAULT_CLIENTS)
    p.add_argument("--seconds", type=float, default=DEFAULT_SECONDS)
    p.add_argument("--max-requests", type=int, default=DEFAULT_MAX_REQUESTS)
    p.add_argument("--no-heavy", action="store_true", help="analyze requests only")
    p.add_argument("--json", action="store_true", help="print the figures as JSON")
    args = p.parse_args(argv)
    figures = run(args.clients, args.seconds, args.max_requests, heavy=not args.no_heavy)
    print(json.dumps(figures, indent=2) if args.json else report(figures, args.clients))
    return 0


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
