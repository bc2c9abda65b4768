"""Speed figures: ``make bench`` or ``python -m ringwise.bench``.

Prints medians and their ratio to the project's targets. It never fails on
time: speed goals are met here, not asserted in tests.
"""

from __future__ import annotations

import json
import statistics
import time
from collections.abc import Callable
from typing import Final

from ringwise.analysis.analyze import _analyze, analyze
from ringwise.analysis.threshold import sweep
from ringwise.circuit.topologies import gain_setter
from ringwise.design import Design, get_param, with_param
from ringwise.resources import sample_files

#: Targets, seconds.
ANALYZE_TARGET: Final = 5e-3
#: Runs of each sample's small-signal analysis behind its median.
ANALYZE_RUNS: Final = 30
SWEEP_TARGET: Final = 100e-3
SWEEP_POINTS: Final = 200
TRANSIENT_CYCLES: Final = 300
SPREAD_SAMPLES: Final = 10_000
SPREAD_LOOP_SAMPLES: Final = 100
SPREAD_TARGET: Final = 1.0
#: Runs of the batched spread behind its median.
SPREAD_RUNS: Final = 3
TRANSIENT_TARGET: Final = 1.0
PHASE_NOISE_TARGET: Final = 50e-3
#: Periodic steady state per sample design: ceiling and aim (cold), and the
#: warm re-solve after a 1 % edit, s.
STEADY_TARGET: Final = 50e-3
STEADY_AIM: Final = 20e-3
STEADY_WARM_TARGET: Final = 15e-3
#: The bench fit with every reading (f, threshold, amplitude, I_C), s.
RECONCILE_TARGET: Final = 5.0


def median_time(fn: Callable[[], object], repeat: int, warmup: int = 2) -> float:
    """Median CPU time of one call, s.

    CPU time of this process (not wall time), so that other work on this
    2-core machine does not count against the figure.
    """
    return median_times([fn], repeat, warmup)[0]


def median_times(fns: list[Callable[[], object]], repeat: int, warmup: int = 2) -> list[float]:
    """:func:`median_time` of several calls, their runs taken in turn (call 1,
    2, …, then 1, 2, … again), so that a slow spell of this shared machine
    falls on all of them, not on the one timed during it."""
    for fn in fns:
        for _ in range(warmup):
            fn()
    times: list[list[float]] = [[] for _ in fns]
    for _ in range(repeat):
        for fn, ts in zip(fns, times, strict=True):
            t0 = time.process_time()
            fn()
            ts.append(time.process_time() - t0)
    return [statistics.median(ts) for ts in times]


def _line(label: str, seconds: float, target: float) -> str:
    ratio = seconds / target
    mark = "meets" if ratio <= 1.0 else "misses"
    return (
        f"  {label:<44} {seconds * 1e3:8.2f} ms   target {target * 1e3:6.1f} ms"
        f"   x{ratio:4.2f} {mark}"
    )


def bench_core() -> list[str]:
    from ringwise.analysis.budget import loop_budget
    from ringwise.analysis.operating import solve
    from ringwise.analysis.periodic import steady_state
    from ringwise.analysis.poles import natural_frequencies
    from ringwise.analysis.stability import stability
    from ringwise.analysis.threshold import find_threshold

    lines = [
        f"analysis core (median CPU time of {ANALYZE_RUNS} runs each, the samples in turn; "
        "'analyze' is the small-signal first answer, the steady state is timed apart below):"
    ]
    designs = [
        Design.model_validate(json.loads(p.read_text(encoding="utf-8"))) for p in sample_files()
    ]
    medians = median_times(
        [lambda d=d: _analyze(d, large_signal=False) for d in designs], ANALYZE_RUNS
    )
    for d, t in zip(designs, medians, strict=True):
        lines.append(_line(f"analyze {d.name[:36]}", t, ANALYZE_TARGET))
        s = solve(d)
        ss = steady_state(s, warm=False)
        setter = gain_setter(d)
        stages = {
            "solve": lambda d=d: solve(d),
            "threshold": lambda d=d, s=s, p=setter: find_threshold(d, p, start=s),
            "budget": lambda s=s, p=setter: loop_budget(s, p),
            "poles": lambda s=s: natural_frequencies(s.ss, s.tank.f_ideal, s.f_osc),
            "stability": lambda s=s, ss=ss: stability(s, ss),
        }
        parts = "  ".join(f"{k} {median_time(fn, 15) * 1e3:.2f}" for k, fn in stages.items())
        lines.append(f"      stages, ms: {parts}")
    d = designs[0]
    param = gain_setter(d)
    value = get_param(d, param)
    assert value is not None
    t = median_time(lambda: sweep(d, param, value / 10, value * 10, SWEEP_POINTS), 5, warmup=1)
    lines.append(
        _line(f"sweep of {param}, {SWEEP_POINTS} points (with threshold)", t, SWEEP_TARGET)
    )
    analyze(d)
    lines.append(
        "  analyze of a design seen before (remembered): "
        f"{median_time(lambda: analyze(d), 30) * 1e3:.2f} ms"
    )
    return lines


def bench_steady() -> list[str]:
    """Periodic steady state of every sample: cold start, and warm after a 1 % edit."""
    from ringwise.analysis.operating import solve
    from ringwise.analysis.periodic import forget, steady_state

    lines = [
        "periodic steady state (median CPU time of 15 runs; solve excluded; aim "
        f"{STEADY_AIM * 1e3:g} ms cold):"
    ]
    designs = [
        Design.model_validate(json.loads(p.read_text(encoding="utf-8"))) for p in sample_files()
    ]
    colds = []
    for d in designs:
        s = solve(d)

        def cold(s=s) -> None:
            forget()
            steady_state(s)

        t_cold = median_time(cold, 15)
        colds.append(t_cold)
        lines.append(_line(f"steady state, cold, {d.name[:28]}", t_cold, STEADY_TARGET))
        part = gain_setter(d)
        edited = [solve(with_param(d, part, get_param(d, part) * k)) for k in (1.01, 0.99)]
        warm_times: list[float] = []
        for i in range(15):
            forget()
            steady_state(s)
            t0 = time.process_time()
            steady_state(edited[i % 2])
            warm_times.append(time.process_time() - t0)
        t_warm = statistics.median(warm_times)
        lines.append(_line(f"  warm after a 1 % edit of {part}", t_warm, STEADY_WARM_TARGET))
    lines.append(
        _line("steady state, cold, median of the samples", statistics.median(colds), STEADY_TARGET)
    )
    return lines


def bench_transient() -> list[str]:
    """300-cycle transients of every sample against SciPy's Radau on the same equations."""
    from ringwise.analysis.reference import reference_run
    from ringwise.analysis.transient import _crossings, run

    lines = [
        f"transient, {TRANSIENT_CYCLES} cycles (wall time, one run each) vs scipy solve_ivp Radau "
        "rtol 1e-7:"
    ]
    for path in sample_files():
        d = Design.model_validate(json.loads(path.read_text(encoding="utf-8")))
        t0 = time.perf_counter()
        ours = run(d, cycles=TRANSIENT_CYCLES)
        t_ours = time.perf_counter() - t0
        t0 = time.perf_counter()
        t, vo, _vb, _ve, f_ref = reference_run(d, TRANSIENT_CYCLES)
        t_ref = time.perf_counter() - t0
        tail = t >= t[-1] - 0.2 * TRANSIENT_CYCLES / f_ref
        ref_amp = 0.5 * (vo[tail].max() - vo[tail].min())
        cross = _crossings(t[tail], vo[tail] - vo[tail].mean())
        ref_f = (len(cross) - 1) / (cross[-1] - cross[0])
        if ours.amp_out_peak is None or ours.f_meas is None:
            # a crystal builds up over thousands of cycles: after 300 there is nothing to
            # compare (its startup time comes from the growth rate, analysis/crystal.py)
            compared = "  still building up after the run: amplitude and f not compared"
        else:
            d_amp = ours.amp_out_peak / ref_amp - 1.0
            d_f = ours.f_meas / ref_f - 1.0
            compared = f"  Δamp {100 * d_amp:+.3f} %  Δf {100 * d_f:+.4f} %"
        lines.append(
            f"  {d.name[:36]:<36} ours {t_ours:6.2f} s (target ≤ {TRANSIENT_TARGET:g} s)"
            f"  Radau {t_ref:6.1f} s  speed-up x{t_ref / t_ours:5.1f} (target ≥ 10)"
            f"{compared}"
        )
    return lines


def bench_spread() -> list[str]:
    """10 000 Monte Carlo samples at three temperature corners, against a Python loop."""
    from ringwise.analysis.operating import solve
    from ringwise.analysis.spread import draw, monte_carlo, sample_design

    d = Design.model_validate(json.loads(sample_files()[0].read_text(encoding="utf-8")))
    monte_carlo(d, samples=SPREAD_LOOP_SAMPLES, seed=1)  # warm-up
    walls, cpus = [], []
    for _ in range(SPREAD_RUNS):
        t0, c0 = time.perf_counter(), time.process_time()
        r = monte_carlo(d, samples=SPREAD_SAMPLES, seed=1)
        walls.append(time.perf_counter() - t0)
        cpus.append(time.process_time() - c0)
    t_batch, c_batch = statistics.median(walls), statistics.median(cpus)
    draws = draw(d, SPREAD_LOOP_SAMPLES, seed=1)
    designs = [
        sample_design(d, draws, i, T)
        for i in range(SPREAD_LOOP_SAMPLES)
        for T in draws.temperatures
    ]
    c0 = time.process_time()
    for one in designs:
        solve(one)
    per_solve = (time.process_time() - c0) / len(designs)
    c_loop = per_solve * SPREAD_SAMPLES * len(r.temperatures)
    return [
        f"spread: {SPREAD_SAMPLES} samples x {len(r.temperatures)} temperatures "
        f"(CPU time of this process, median of {SPREAD_RUNS} runs; wall time beside it):",
        f"  batched {c_batch:6.2f} s (target ≤ {SPREAD_TARGET:g} s; wall {t_batch:.2f} s)   "
        f"looping the single-design solve would take {c_loop:6.1f} s "
        f"({per_solve * 1e3:.2f} ms each, measured on {len(designs)})   "
        f"speed-up x{c_loop / c_batch:5.1f} (target ≥ 50)",
    ]


def bench_phase_noise() -> list[str]:
    """Phase noise after the steady state, per sample; effective F beside the assumed one."""
    import math

    from ringwise.analysis.operating import solve
    from ringwise.analysis.periodic import steady_state
    from ringwise.analysis.phase_noise import oscillator_noise

    lines = ["phase noise from the noise sources (median CPU time of 15, after the steady state):"]
    for path in sample_files():
        d = Design.model_validate(json.loads(path.read_text(encoding="utf-8")))
        s = solve(d)
        ss = steady_state(s, warm=False)
        if ss.orbit is None:
            lines.append(f"  {d.name[:36]:<36} no orbit: {ss.reason}")
            continue
        t = median_time(lambda s=s, ss=ss: oscillator_noise(s, ss), 15)
        lines.append(_line(f"phase noise {d.name[:32]}", t, PHASE_NOISE_TARGET))
        on = oscillator_noise(s, ss)
        assert on is not None
        F = f"{10 * math.log10(on.F_effective):5.1f} dB" if on.F_effective else "  n/a"
        corner = f"{on.noise.corner:.3g} Hz" if on.noise.corner else "none"
        lines.append(
            f"      F effective {F} (assumed {d.noise.F_dB:g} dB)   c {on.noise.diffusion:.3g} s"
            f"   L(1 kHz) {on.noise.at(1e3):6.1f}  L(100 kHz) {on.noise.at(1e5):6.1f} dBc/Hz"
            f"   1/f³ corner {corner}"
        )
    return lines


def bench_reconcile() -> list[str]:
    """The bench fit on each sample with every reading, from a synthetic as-built unit
    (capacitance +3 %, coil Q −30 %): CPU time, one run each."""
    import numpy as np

    from ringwise.analysis.reconcile import _apply, _model, reconcile

    lines = ["bench fit (f, threshold of the gain setter, amplitude, I_C; CPU time):"]
    for path in sample_files():
        d = Design.model_validate(json.loads(path.read_text(encoding="utf-8")))
        setter = gain_setter(d)
        bench = _model(_apply(d, np.log([1.03, 0.7, 1.0])), setter, True)
        readings = (bench["f"], (setter, bench["threshold"]), bench["amplitude"], bench["IC"])
        t = median_time(lambda d=d, r=readings: reconcile(d, *r), 1, warmup=0)
        lines.append(
            f"  {d.name[:36]:<36} {t:6.2f} s (target ≤ {RECONCILE_TARGET:g} s)"
            f"   x{t / RECONCILE_TARGET:4.2f} {'meets' if t <= RECONCILE_TARGET else 'misses'}"
        )
    return lines


def bench_web() -> list[str]:
    try:
        from ringwise.web.bench import bench_web as web
    except ImportError:
        return ["web layer: not present"]
    figures = web()
    if isinstance(figures, dict):
        return ["web layer:"] + [f"  {key:<44} {value}" for key, value in figures.items()]
    return list(figures)


def main() -> None:
    for line in bench_core():
        print(line, flush=True)
    for line in bench_steady():
        print(line, flush=True)
    for line in bench_phase_noise():
        print(line, flush=True)
    for line in bench_spread():
        print(line, flush=True)
    for line in bench_reconcile():
        print(line, flush=True)
    for line in bench_web():
        print(line, flush=True)
    for line in bench_transient():
        print(line, flush=True)


if __name__ == "__main__":
    main()
