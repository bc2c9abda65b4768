"""Speed figures: ``make bench`` or ``python -m app.bench``.

Prints medians and their ratio to the project's targets. It never fails on
time: speed goals are met here, not asserted in tests.
"""

from __future__ import annotations

import json
import statistics
import time
from collections.abc import Callable
from pathlib import Path
from typing import Final

from app.analysis.analyze import analyze
from app.analysis.threshold import sweep
from app.circuit.topologies import GAIN_SETTER
from app.design import Design, get_param

SAMPLES: Final = Path(__file__).resolve().parent.parent / "sample_designs"
#: Targets, seconds.
ANALYZE_TARGET: Final = 5e-3
SWEEP_TARGET: Final = 200e-3
SWEEP_POINTS: Final = 200


def median_time(fn: Callable[[], object], repeat: int, warmup: int = 2) -> float:
    """Median CPU time of one call, s.

    CPU time of this process (not wall time), so that other work on this
    2-core machine does not count against the figure.
    """
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(repeat):
        t0 = time.process_time()
        fn()
        times.append(time.process_time() - t0)
    return statistics.median(times)


def _line(label: str, seconds: float, target: float) -> str:
    ratio = seconds / target
    mark = "meets" if ratio <= 1.0 else "misses"
    return (
        f"  {label:<44} {seconds * 1e3:8.2f} ms   target {target * 1e3:6.1f} ms"
        f"   x{ratio:4.2f} {mark}"
    )


def bench_core() -> list[str]:
    lines = ["analysis core (median CPU time of 30 runs each):"]
    designs = [
        Design.model_validate(json.loads(p.read_text(encoding="utf-8")))
        for p in sorted(SAMPLES.glob("*.json"))
    ]
    for d in designs:
        lines.append(
            _line(f"analyze {d.name[:36]}", median_time(lambda d=d: analyze(d), 30), ANALYZE_TARGET)
        )
    d = designs[0]
    param = GAIN_SETTER[d.topology]
    value = get_param(d, param)
    assert value is not None
    t = median_time(lambda: sweep(d, param, value / 10, value * 10, SWEEP_POINTS), 5, warmup=1)
    lines.append(
        _line(f"sweep of {param}, {SWEEP_POINTS} points (with threshold)", t, SWEEP_TARGET)
    )
    return lines


def bench_web() -> list[str]:
    try:
        from app.web.bench import bench_web as web
    except ImportError:
        return ["web layer: not present"]
    figures = web()
    if isinstance(figures, dict):
        return ["web layer:"] + [f"  {key:<44} {value}" for key, value in figures.items()]
    return list(figures)


def main() -> None:
    for line in bench_core():
        print(line, flush=True)
    for line in bench_web():
        print(line, flush=True)


if __name__ == "__main__":
    main()
