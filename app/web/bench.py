"""Speed figures of the web layer, for ``make bench`` (printed, never asserted).

:func:`bench_web` measures

- the median server time of ``POST /api/analyze`` over the sample designs,
  each request a design not seen before (C2 nudged), small-signal and steady
  state (in process, FastAPI's TestClient, the light workers computing), and
- when Chromium is installed, in headless Chromium at 1440 × 1200 px
  (the verdict and the loop and what-if plots on screen):

  - **edit**: the median time from a committed edit of C2 (its ``change``
    event, as when the user presses Enter or leaves the field) to the
    verdict, the figures and every visible plot redrawn (the sheet's
    ``ringwise:rendered`` event, fired once the plots are drawn), over
    :data:`EDITS` edits; target 150 ms, aim 100 ms;
  - **what-if**: from the same edit to the what-if plot redrawn
    (``ringwise:swept``); target 250 ms;
  - **steady state**: from the same edit to the large-signal figures shown
    (``ringwise:steady``; they follow the what-if plot);
  - **drag**: :data:`DRAG_STEPS` steps of the RC slider, one every
    :data:`DRAG_STEP_MS` ms; the longest task that blocked the page meanwhile
    (Chromium's Long Tasks API reports every task over 50 ms; none means
    none was), and the time from the last step to the sheet showing it.

Each edit starts once the previous one's steady state is shown, as when a
person edits, looks, and edits again; the first once the server's worker
processes have started (they start in the background after the server, some
2 s of CPU on two cores, which would otherwise fall on the first edits).
Every edit is a design not seen before, so the server's memory of recent
analyses does not flatter the figures.

Wall-clock figures on a shared, loaded machine mostly measure the load, so
each is printed beside its CPU time, which the load hardly changes: the page's
main thread (the CPU time of its tasks and their microtask checkpoints, from a
Chromium trace, between marks the bench sets at the edit and at each event) and
the server's (the thread CPU time of the sheet's and the sweep's view building,
per request).  Their sum is what the edit costs on an idle machine, less the
network's few milliseconds and the server's work around the view (reading the
request, writing and compressing the answer).
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import shutil
import statistics
import tempfile
import threading
import time
from typing import Final

from ringwise.units import parse_quantity
from ringwise.web.paths import SAMPLES_DIR

EDIT_TARGET_S: Final = 0.150
EDIT_AIM_S: Final = 0.100
WHAT_IF_TARGET_S: Final = 0.250
#: The longest a slider drag may block the page at a time, s.
BLOCK_TARGET_S: Final = 0.050
ANALYZE_REPEATS: Final = 10
EDITS: Final = 20
DRAG_STEPS: Final = 40
DRAG_STEP_MS: Final = 30
VIEWPORT: Final = {"width": 1440, "height": 1200}
#: C2 values typed in turn; every edit is a design not seen before.
EDIT_VALUES: Final = tuple(f"{4.0 + 0.05 * i:.2f}n" for i in range(40))
CHROMIUM_ARGS: Final = (
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--no-first-run",
)

_EDIT_JS: Final = """async (text) => {
  const el = document.querySelector("[name='C2']");
  const wait = (name) => new Promise((resolve) =>
    document.addEventListener(name, (e) => { performance.mark(name); resolve(e.detail); },
      { once: true }));
  const rendered = wait("ringwise:rendered");
  const swept = wait("ringwise:swept");
  const steady = wait("ringwise:steady");
  performance.mark("ringwise:edit");
  const t0 = performance.now();
  el.value = text;
  el.dispatchEvent(new Event("change", { bubbles: true }));
  const a = await rendered;
  const b = await swept;
  const c = await steady;
  return [a.at - t0, b.at - t0, c.at - t0];
}"""

_DRAG_JS: Final = """async ([steps, every]) => {
  const slider = document.querySelector("[data-ladder='RC']");
  const longest = [];
  performance.mark("ringwise:drag");
  const watch = new PerformanceObserver((list) => {
    for (const e of list.getEntries()) longest.push(e.duration);
  });
  watch.observe({ type: "longtask" });
  const start = Number(slider.value);
  const top = Number(slider.max);
  let last = 0;
  for (let i = 1; i <= steps; i++) {
    slider.value = String((start + i) % (top + 1));
    slider.dispatchEvent(new Event("input", { bubbles: true }));
    last = performance.now();
    await new Promise((r) => setTimeout(r, every));
  }
  const want = document.querySelector("[name='RC']").value;
  await new Promise((resolve) => {
    document.addEventListener("ringwise:rendered", function on(e) {
      if (new URLSearchParams(e.detail.query).get("RC") !== want) return;
      document.removeEventListener("ringwise:rendered", on);
      resolve();
    });
  });
  const settled = performance.now() - last;
  await new Promise((r) => setTimeout(r, 200));
  performance.mark("ringwise:dragged");
  watch.disconnect();
  return { longest: longest.length ? Math.max(...longest) : 0, over: longest.length, settled };
}"""


def _api_median() -> float:
    from fastapi.testclient import TestClient

    from ringwise.analysis.analyze import forget
    from ringwise.web.server import create_app

    docs = [json.loads(p.read_text(encoding="utf-8")) for p in sorted(SAMPLES_DIR.glob("*.json"))]
    times = []
    with TestClient(create_app(), base_url="http://127.0.0.1") as client:
        for doc in docs:
            client.post("/api/analyze", json=doc)  # warm up
            C2 = parse_quantity(doc["tank"]["C2"], "F")
            for i in range(ANALYZE_REPEATS):
                # a design not seen before each time: the analysis, not the memory of
                # it (the light workers keep their own, which forget() here can't clear)
                forget()
                edited = {**doc, "tank": {**doc["tank"], "C2": C2 * (1.0 + 1e-4 * (i + 1))}}
                t0 = time.perf_counter()
                client.post("/api/analyze", json=edited).raise_for_status()
                times.append(time.perf_counter() - t0)
    return statistics.median(times)


#: Trace categories: the main thread's tasks with their CPU time, and the marks.
TRACE_CATEGORIES: Final = ["toplevel", "blink.user_timing"]
#: The microtask checkpoint Chromium runs after each task of the page's main thread,
#: traced beside the task's own event, not inside it: promise callbacks run there
#: (all the code after an ``await``: a fetch's answer handled, the sheet rendered).
CHECKPOINT_EVENT: Final = "BlinkScheduler_PerformMicrotaskCheckpoint"


def _task_cpu(trace: dict) -> tuple[dict[str, list[float]], list[tuple[float, float, float]]]:
    """The bench's marks (name -> times, µs) and the main thread's tasks (start µs,
    wall µs, CPU µs) of a Chromium trace: each top-level event that no other holds,
    with the microtask checkpoint that follows it counted as its own."""
    events = trace["traceEvents"] if isinstance(trace, dict) else trace
    marks: dict[str, list[float]] = {}
    for e in events:
        if e.get("cat") == "blink.user_timing" and e.get("name", "").startswith("ringwise:"):
            marks.setdefault(e["name"], []).append(e["ts"])
    main = {
        (e["pid"], e["tid"])
        for e in events
        if e.get("name") == "thread_name" and e["args"].get("name") == "CrRendererMain"
    }
    top = sorted(
        (
            e
            for e in events
            if e.get("ph") == "X"
            and (e["pid"], e["tid"]) in main
            and "toplevel" in e.get("cat", "").split(",")
        ),
        key=lambda e: (e["ts"], -e["dur"]),
    )
    tasks: list[tuple[float, float, float]] = []
    end = -math.inf
    for e in top:
        if e["ts"] < end:
            continue  # inside the event before (a message handled within a task)
        start, wall, cpu = e["ts"], e["dur"], e.get("tdur", e["dur"])
        end = start + wall
        if e["name"] == CHECKPOINT_EVENT and tasks:
            first, _, before = tasks[-1]
            tasks[-1] = (first, end - first, before + cpu)
        else:
            tasks.append((start, wall, cpu))
    return marks, tasks


def _cpu_between(tasks: list[tuple[float, float, float]], t0: float, t1: float) -> float:
    """CPU time of the main thread's tasks that ran between two trace times (the one
    the first time falls in, where the edit is made, included), s."""
    return sum(cpu for start, wall, cpu in tasks if t0 < start + wall and start < t1) / 1e6


class _ServerCPU:
    """Thread CPU time of the sheet's routes' view building, by kind, s (the routes
    run in FastAPI's thread pool; each call is timed in its own thread)."""

    def __init__(self) -> None:
        self.times: dict[str, list[float]] = {"sheet": [], "steady": [], "sweep": []}
        self.lock = threading.Lock()

    def wrap(self, module) -> None:
        build, sweep = module.build_view, module.sweep_view

        def timed_build(*args, **kw):
            t0 = time.thread_time()
            try:
                return build(*args, **kw)
            finally:
                kind = "steady" if kw.get("with_steady", True) else "sheet"
                self._add(kind, time.thread_time() - t0)

        def timed_sweep(*args, **kw):
            t0 = time.thread_time()
            try:
                return sweep(*args, **kw)
            finally:
                self._add("sweep", time.thread_time() - t0)

        module.build_view, module.sweep_view = timed_build, timed_sweep

    def _add(self, kind: str, seconds: float) -> None:
        with self.lock:
            self.times[kind].append(seconds)

    def clear(self) -> None:
        with self.lock:
            for v in self.times.values():
                v.clear()


#: The server's worker processes count as started once, over two looks of this long
#: in a row, s, they used under this share of one core (their start: the fork server's imports,
#: a warm analysis in each light worker) ...
IDLE_LOOK_S: Final = 0.5
IDLE_SHARE: Final = 0.05
#: ... or after this long at most, s.
IDLE_WAIT_S: Final = 30.0


def _descendants_cpu() -> float | None:
    """CPU time used so far by this process's descendants (the server's worker
    processes and their fork server), s; ``None`` where ``/proc`` cannot tell."""
    try:
        stats = {}
        for entry in os.listdir("/proc"):
            if entry.isdigit():
                with contextlib.suppress(OSError), open(f"/proc/{entry}/stat") as f:
                    fields = f.read().rpartition(")")[2].split()
                    stats[int(entry)] = (int(fields[1]), int(fields[11]) + int(fields[12]))
    except OSError:
        return None
    tick = os.sysconf("SC_CLK_TCK")
    ours, total, grew = {os.getpid()}, 0, True
    while grew:
        grew = False
        for pid, (parent, _) in stats.items():
            if parent in ours and pid not in ours:
                ours.add(pid)
                total += stats[pid][1]
                grew = True
    return total / tick


def _wait_for_idle_workers() -> None:
    """Wait until the server's worker processes have started (they start in the
    background and would share the machine's cores with the first edits measured)."""
    deadline = time.monotonic() + IDLE_WAIT_S
    before, quiet = _descendants_cpu(), 0
    while before is not None and quiet < 2 and time.monotonic() < deadline:
        time.sleep(IDLE_LOOK_S)
        now = _descendants_cpu()
        if now is None:
            return
        quiet = quiet + 1 if now - before < IDLE_SHARE * IDLE_LOOK_S else 0
        before = now


def _browser() -> dict[str, float]:
    import socket

    import uvicorn
    from playwright.sync_api import sync_playwright

    from ringwise.web.routers import api
    from ringwise.web.server import create_app

    server_cpu = _ServerCPU()
    server_cpu.wrap(api)
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    server = uvicorn.Server(
        uvicorn.Config(create_app(), host="127.0.0.1", port=port, log_level="warning")
    )
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    while not server.started:
        time.sleep(0.02)
    _wait_for_idle_workers()
    try:
        with tempfile.TemporaryDirectory() as profile, sync_playwright() as p:
            ctx = p.chromium.launch_persistent_context(
                profile,
                executable_path=shutil.which("chromium"),
                headless=True,
                args=list(CHROMIUM_ARGS),
                viewport=VIEWPORT,
            )
            page = ctx.new_page()
            page.goto(f"http://127.0.0.1:{port}/?design=clapp-clock-1M")
            page.wait_for_selector("html[data-ready='1']")
            page.wait_for_selector("#plot-sweep .main-svg")
            page.evaluate(_EDIT_JS, "2n2")  # warm up
            server_cpu.clear()
            ctx.browser.start_tracing(page=page, categories=TRACE_CATEGORIES)
            times = [
                page.evaluate(_EDIT_JS, EDIT_VALUES[i % len(EDIT_VALUES)]) for i in range(EDITS)
            ]
            sizes = page.evaluate(
                """() => Object.fromEntries(performance.getEntriesByType("resource")
                     .filter((e) => e.name.includes("/api/sheet"))
                     .map((e) => [new URL(e.name).pathname, e.decodedBodySize]))"""
            )
            drag = page.evaluate(_DRAG_JS, [DRAG_STEPS, DRAG_STEP_MS])
            trace = json.loads(ctx.browser.stop_tracing())
            ctx.close()
    finally:
        server.should_exit = True
        thread.join(timeout=5)
    marks, tasks = _task_cpu(trace)
    starts = marks["ringwise:edit"]
    cpu_edit = [
        _cpu_between(tasks, t0, t1)
        for t0, t1 in zip(starts, marks["ringwise:rendered"], strict=True)
    ]
    cpu_what_if = [
        _cpu_between(tasks, t0, t1) for t0, t1 in zip(starts, marks["ringwise:swept"], strict=True)
    ]
    d0, d1 = marks["ringwise:drag"][0], marks["ringwise:dragged"][0]
    in_drag = [(wall, cpu) for start, wall, cpu in tasks if d0 <= start < d1]
    ms = statistics.median
    return {
        "edit": ms(t[0] for t in times) / 1e3,
        "what_if": ms(t[1] for t in times) / 1e3,
        "steady": ms(t[2] for t in times) / 1e3,
        "edit_page_cpu": ms(cpu_edit),
        "what_if_page_cpu": ms(cpu_what_if),
        "sheet_server_cpu": ms(server_cpu.times["sheet"]),
        "sweep_server_cpu": ms(server_cpu.times["sweep"]),
        "steady_server_cpu": ms(server_cpu.times["steady"]),
        "sheet_bytes": sizes.get("/api/sheet", 0),
        "sweep_bytes": sizes.get("/api/sheet/sweep", 0),
        "longest_block": drag["longest"] / 1e3,
        "longest_block_cpu": max((cpu for _wall, cpu in in_drag), default=0.0) / 1e6,
        "blocks_over_50ms": drag["over"],
        "drag_settled": drag["settled"] / 1e3,
    }


def _line(label: str, value: float, target: float, extra: str = "") -> str:
    return (
        f"  {label:<44} {value * 1e3:8.1f} ms  (target ≤ {target * 1e3:.0f} ms{extra})"
        f"  ratio {value / target:5.2f}"
    )


def bench_web() -> list[str]:
    """The web speed figures as printed lines (see the module docstring)."""
    lines = [
        "web layer:",
        f"  {'POST /api/analyze, median (with its steady state)':<44} "
        f"{_api_median() * 1e3:8.1f} ms  (no target of its own: the small-signal core's "
        "is above, the server's under load in make load)",
    ]
    if shutil.which("chromium") is None:
        return [*lines, "  browser: skipped (apt-get install chromium)"]
    b = _browser()
    aim = f", aim {EDIT_AIM_S * 1e3:.0f} ms"
    edit_cpu = b["edit_page_cpu"] + b["sheet_server_cpu"]
    what_if_cpu = b["what_if_page_cpu"] + b["sheet_server_cpu"] + b["sweep_server_cpu"]

    def cpu(label: str, value: float) -> str:
        return f"  {label:<44} {value * 1e3:8.1f} ms"

    return [
        *lines,
        "  headless Chromium, 1440 x 1200 px (wall clock: noisy on a shared machine):",
        _line("edit -> verdict and visible plots, median", b["edit"], EDIT_TARGET_S, aim),
        _line("edit -> what-if plot, median", b["what_if"], WHAT_IF_TARGET_S),
        cpu("edit -> steady state shown, median", b["steady"]),
        _line(
            f"slider drag ({DRAG_STEPS} steps): longest block",
            b["longest_block"],
            BLOCK_TARGET_S,
            f"; {b['blocks_over_50ms']} tasks over 50 ms",
        ),
        cpu("slider drag: last step -> sheet shows it", b["drag_settled"]),
        "  the same in CPU time (page main thread + server view building, medians):",
        _line("edit -> verdict and visible plots", edit_cpu, EDIT_TARGET_S, aim),
        cpu("  page main thread", b["edit_page_cpu"]),
        cpu("  server, POST /api/sheet", b["sheet_server_cpu"]),
        _line("edit -> what-if plot", what_if_cpu, WHAT_IF_TARGET_S),
        cpu("  page main thread", b["what_if_page_cpu"]),
        cpu("  server, POST /api/sheet/sweep", b["sweep_server_cpu"]),
        cpu("server, POST /api/sheet/steady", b["steady_server_cpu"]),
        _line("slider drag: longest task's CPU time", b["longest_block_cpu"], BLOCK_TARGET_S),
        f"  {'answer sizes: /api/sheet, /api/sheet/sweep':<44} "
        f"{b['sheet_bytes'] / 1e3:8.1f} kB, {b['sweep_bytes'] / 1e3:.1f} kB",
    ]


if __name__ == "__main__":  # pragma: no cover
    for line in bench_web():
        print(line)
