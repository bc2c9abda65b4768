r"""Monte Carlo spread over part tolerances and temperature, vectorised.

Every sample is the full small-signal analysis of the one circuit model —
DC operating point by Newton, hybrid-π, return ratio and its zero-phase
crossing, and the dominant natural frequency — but computed for all samples
and temperature corners at once: one batched assembly from the unit stamps
(:func:`ringwise.circuit.mna.linear_patterns`), a batched Newton on the nodal
equations, and the batched loop search of :mod:`ringwise.analysis.loop`.

Distributions (common practice, no source): each tolerance is the half-width
of a uniform distribution; β and I_S are log-uniform between the limits of
their ratio; capacitors follow their dielectric class — C0G/NP0
0 ± 30 ppm/°C, X7R within ±15 % over −55 … +125 °C, modelled here as a
linear drift of random slope inside that limit (EIA-198 / IEC 60384-8 and -9
class limits, from memory) — and the coil its temperature coefficient.  The
transistor's temperature behaviour enters through I_S(T) and V_T(T).

The real part of the dominant pole is taken as the first Newton step of
1 − T(s) = 0 from jω_osc: σ ≈ Re[(1 − T)/T′] — exact at the threshold and a
close estimate near it, which is where yield is decided.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Final

import numpy as np

from ringwise.analysis.criteria import MARGINAL_BELOW
from ringwise.analysis.crystal import NEGATIVE_R_RULE, crystal_margins
from ringwise.analysis.operating import Solved, solve
from ringwise.analysis.pipeline import (
    BatchSolution,
    f_ideal_of,
    join_values,
    part_values,
    patterns_of_structure,
    solve_values,
)
from ringwise.circuit.mna import Patterns
from ringwise.design import CAPACITOR_PARTS, TOLERANCED_PARTS, Design, with_param
from ringwise.errors import DesignError

DEFAULT_SAMPLES: Final = 2000
MAX_SAMPLES: Final = 100_000
#: C0G/NP0 temperature coefficient limit, 1/°C (class 1, from memory).
C0G_TEMPCO: Final = 30e-6
#: X7R: capacitance within ±15 % over −55 … +125 °C (class 2, from memory);
#: as a linear drift, at most 15 % per 100 °C from 25 °C.
X7R_DRIFT_PER_100C: Final = 0.15
T_REFERENCE_C: Final = 25.0
PERCENTILES: Final = (1, 5, 50, 95, 99)
#: The frequency-against-temperature band: this many temperatures across the
#: range, each with up to TEMPERATURE_BAND_SAMPLES samples.
TEMPERATURE_STEPS: Final = 7
TEMPERATURE_BAND_SAMPLES: Final = 400
HISTOGRAM_BINS: Final = 40
#: Samples solved in one pipeline batch: bounds a run's memory (a batch keeps
#: every member's matrices while it is solved) and is how often a long run
#: reports progress and may be stopped (a 2 000-sample chunk is some 20 ms per
#: temperature corner on this machine, a 10 000-sample run peaks near 25 MB).
CHUNK_SAMPLES: Final = 2000
WORST_CASES: Final = 5
RESISTORS: Final = ("RB1", "RB2", "RC", "RE", "R_load")
#: The choke's parts, drawn only when the collector is fed through it.
CHOKE_PARTS: Final = ("L_ch", "Q_ch")


class SpreadError(DesignError):
    """A spread request that cannot be run as asked."""


@dataclass(frozen=True)
class Draws:
    """Sampled part values (at 25 °C) and temperature coefficients, one row per sample."""

    values: dict[str, np.ndarray]
    cap_drift: dict[str, np.ndarray]  # relative change per °C from 25 °C
    temperatures: tuple[float, ...]
    seed: int


def draw(design: Design, samples: int, seed: int) -> Draws:
    """Sample every part of ``design`` within its tolerance (reproducible for a seed)."""
    if not 1 <= samples <= MAX_SAMPLES:
        raise SpreadError(f"samples must be between 1 and {MAX_SAMPLES}, got {samples}")
    rng = np.random.default_rng(seed)
    tol = design.tolerances
    d = design.device
    values: dict[str, np.ndarray] = {}
    nominal = part_values(design)
    # In the order of TOLERANCED_PARTS: the order fixes which random numbers
    # each part gets for a seed.
    for part in TOLERANCED_PARTS:
        value = nominal[part]
        if value is None or (part in CHOKE_PARTS and not design.choke_fed):
            continue
        values[part] = value * (1.0 + tol.of(part) * rng.uniform(-1.0, 1.0, samples))
    for part, ratio, value in (("beta", tol.beta_ratio, d.beta), ("IS", tol.IS_ratio, d.IS)):
        values[part] = value * ratio ** rng.uniform(-0.5, 0.5, samples)
    drift: dict[str, np.ndarray] = {}
    for part in CAPACITOR_PARTS:
        if part not in values:
            continue
        if tol.dielectric_of(part) == "C0G":
            drift[part] = rng.uniform(-C0G_TEMPCO, C0G_TEMPCO, samples)
        else:
            drift[part] = rng.uniform(-X7R_DRIFT_PER_100C, X7R_DRIFT_PER_100C, samples) / 100.0
    corners = tuple(dict.fromkeys((tol.T_min, design.temperature_C, tol.T_max)))
    return Draws(values, drift, corners, seed)


def _subset(draws: Draws, start: int, stop: int) -> Draws:
    """Samples ``start`` … ``stop − 1`` of ``draws`` (views, no copies)."""
    return Draws(
        {k: v[start:stop] for k, v in draws.values.items()},
        {k: v[start:stop] for k, v in draws.cap_drift.items()},
        draws.temperatures,
        draws.seed,
    )


def values_at(design: Design, draws: Draws, T_C: float) -> dict[str, np.ndarray]:
    """Part values of every sample at temperature ``T_C`` (°C)."""
    out = dict(draws.values)
    dT = T_C - T_REFERENCE_C
    for part, k in draws.cap_drift.items():
        out[part] = draws.values[part] * (1.0 + k * dT)
    if "L" in draws.values:  # a coil (a crystal replaces it)
        out["L"] = draws.values["L"] * (1.0 + design.tolerances.L_tempco_ppm * 1e-6 * dT)
    return out


def sample_design(design: Design, draws: Draws, i: int, T_C: float) -> Design:
    """Sample ``i`` at ``T_C`` as an ordinary design (for checks and worst-case reports)."""
    vals = values_at(design, draws, T_C)
    out = design.model_copy(update={"temperature_C": T_C})
    for part, arr in vals.items():
        out = with_param(out, part, float(arr[i]))
    return out


@dataclass(frozen=True)
class Batch:
    """Figures of every sample at one temperature (arrays of shape (samples,)).

    ``solution`` is the pipeline's own answer; ``starts`` and ``active`` use
    the one definition of :mod:`ringwise.analysis.criteria`, so a sample
    counts as starting exactly when its single-design verdict says it starts.
    """

    T_C: float
    solution: BatchSolution
    #: σ of the dominant pole pair estimated from one Newton step of 1 − T(s) = 0
    #: from jω_osc, 1/s (NaN where there is no crossing).
    sigma: np.ndarray

    @property
    def f_osc(self) -> np.ndarray:
        return self.solution.loop.f_osc

    @property
    def gain(self) -> np.ndarray:
        return self.solution.gain

    @property
    def IC(self) -> np.ndarray:
        return self.solution.junction.IC

    @property
    def VCE(self) -> np.ndarray:
        return self.solution.vce

    @property
    def converged(self) -> np.ndarray:
        return self.solution.converged

    @property
    def active(self) -> np.ndarray:
        return self.solution.active

    @property
    def starts(self) -> np.ndarray:
        return self.solution.starts


#: Relative change of each drawn part for the slopes of the samples' first
#: frequency guess: about a tolerance, so that a slope spans the spread rather
#: than one point (common practice, no source).
GUESS_STEP: Final = 0.02
#: The parts whose spread moves the samples' first frequency guess.
GUESS_PARTS: Final = (*TOLERANCED_PARTS, "beta", "IS")


@dataclass(frozen=True)
class _Prepared:
    r"""What every batch of one design shares: the nominal solve, the unit stamps,
    and where each sample's Newton starts.

    The DC Newton starts at the nominal design's operating point at the
    sample's temperature (and tuning voltage); the frequency search at
    f_ideal·r with r = f_osc/f_ideal (the tank sets f, r is what the loading
    and the transistor make of it) taken to first order in the parts,

    .. math:: \ln r = \ln r_0(T, V) + \sum_p S_p \ln(p/p_0),

    r₀ of the nominal design at that corner and S_p the slope of ln r against
    ln p at the design's own corner (one-sided, :data:`GUESS_STEP`).  A start
    within about 1e-5 of the crossing lets Newton settle on its second
    solve.  The starts change where the iterations begin, not where they end.
    """

    nominal: Solved
    patterns: Patterns
    base: dict
    slopes: dict[str, float]
    #: (T, V_tune) → (the nominal's DC solution there, ln r₀ there)
    starts: dict = field(default_factory=dict)

    def start_at(self, keys: list[tuple[float, float | None]]) -> None:
        """Solve the nominal design at the corners ``keys`` not met yet (one batch)."""
        todo = list(dict.fromkeys(k for k in keys if k not in self.starts))
        if not todo:
            return
        blocks = [(_at(self.base, T, V), 1) for T, V in todo]
        sol = _solve_nominal(self, join_values(blocks), len(blocks))
        ln_r = np.log(sol.loop.f_osc / sol.f_ideal)
        own = self.starts[_own(self.base)]
        for i, key in enumerate(todo):
            ok = sol.converged[i] and np.isfinite(ln_r[i])
            self.starts[key] = (sol.x[i], float(ln_r[i])) if ok else own


def _own(base: dict) -> tuple[float, float | None]:
    return (base["temperature_C"], base.get("V_tune"))


def _at(base: dict, T: float, V: float | None) -> dict:
    """Part values of the nominal design at temperature T and tuning voltage V."""
    return {**base, "temperature_C": T, **({} if V is None else {"V_tune": V})}


def _solve_nominal(prepared: _Prepared, values: dict, n: int) -> BatchSolution:
    nominal = prepared.nominal
    return solve_values(prepared.patterns, values, n, nominal.op.x, nominal.f_osc or None)


def _prepare(design: Design) -> _Prepared:
    nominal = solve(design)
    base = part_values(design)
    parts = [p for p in GUESS_PARTS if isinstance(base.get(p), float) and base[p] > 0]
    prepared = _Prepared(nominal, patterns_of_structure(design), base, {})
    f_ideal = float(f_ideal_of(base, 1)[0])
    ln_r0 = math.log(nominal.f_osc / f_ideal) if nominal.f_osc else 0.0
    prepared.starts[_own(base)] = (nominal.op.x, ln_r0)
    if nominal.f_osc and parts:
        blocks = [({**base, p: base[p] * (1.0 + GUESS_STEP)}, 1) for p in parts]
        sol = _solve_nominal(prepared, join_values(blocks), len(blocks))
        with np.errstate(divide="ignore", invalid="ignore"):
            S = (np.log(sol.loop.f_osc / sol.f_ideal) - ln_r0) / math.log1p(GUESS_STEP)
        prepared.slopes.update(
            {
                p: float(v)
                for p, v, ok in zip(parts, S, sol.converged, strict=True)
                if ok and np.isfinite(v)
            }
        )
    return prepared


def analyse_batch(
    design: Design, vals: dict[str, np.ndarray], T_C: float, prepared: _Prepared | None = None
) -> Batch:
    """The small-signal analysis of every sample at ``T_C``: one batch of the pipeline."""
    n_samples = len(vals["beta"])
    prepared = prepared or _prepare(design)
    values: dict = {**part_values(design), **vals, "temperature_C": T_C}
    sol = _solve_samples(values, n_samples, prepared)
    loop = sol.loop
    with np.errstate(divide="ignore", invalid="ignore"):
        sigma = np.where(loop.found, ((1.0 - loop.T) / loop.dT_ds).real, np.nan)
    return Batch(T_C, sol, sigma)


def _solve_samples(values: dict, n_samples: int, prepared: _Prepared) -> BatchSolution:
    """The pipeline on samples' part values (temperature included, a float or
    one per sample), started where :class:`_Prepared` says."""
    T, V = values["temperature_C"], values.get("V_tune")
    if np.ndim(T) == 0 and np.ndim(V) == 0:  # one corner (the band has several)
        keys = [(float(T), None if V is None else float(V))]
        member = np.zeros(n_samples, dtype=int)
    else:
        corner = np.empty((n_samples, 2))  # each member's (T, V_tune)
        corner[:, 0] = T
        corner[:, 1] = 0.0 if V is None else V
        corners, member = np.unique(corner, axis=0, return_inverse=True)
        member = member.reshape(-1)
        keys = [(float(t), None if V is None else float(v)) for t, v in corners]
    prepared.start_at(keys)
    x0 = np.stack([prepared.starts[k][0] for k in keys])[member]
    ln_r = np.array([prepared.starts[k][1] for k in keys])[member]
    with np.errstate(divide="ignore", invalid="ignore"):
        for part, S in prepared.slopes.items():
            ln_r = ln_r + S * np.log(values[part] / prepared.base[part])
    f_guess = f_ideal_of(values, n_samples) * np.exp(ln_r)
    return solve_values(prepared.patterns, values, n_samples, x0, f_guess)


def _band(
    design: Design, draws: Draws, temperatures: np.ndarray, prepared: _Prepared
) -> list[tuple[float, float, float, float]]:
    """f_osc percentiles (5, 50, 95) of the samples at each temperature: every
    temperature's samples in one batch of the pipeline."""
    n = len(draws.values["beta"])  # every design has a transistor (not always a coil)
    blocks = [
        (
            {
                **part_values(design),
                **values_at(design, draws, float(T)),
                "temperature_C": float(T),
            },
            n,
        )
        for T in temperatures
    ]
    sol = _solve_samples(join_values(blocks), n * len(blocks), prepared)
    f_all = np.where(sol.converged, sol.loop.f_osc, np.nan).reshape(len(blocks), n)
    band = []
    for T, f in zip(temperatures, f_all, strict=True):
        f = f[np.isfinite(f)]
        if f.size:
            p5, p50, p95 = np.percentile(f, (5, 50, 95))
            band.append((float(T), float(p5), float(p50), float(p95)))
    return band


@dataclass(frozen=True)
class Corner:
    """Figures of every sample at one temperature corner, gathered over the chunks
    of a run (arrays of shape (samples,)); the pipeline's full answers are dropped
    chunk by chunk, so a run's memory does not grow with its full solutions."""

    T_C: float
    f_osc: np.ndarray
    gain: np.ndarray
    IC: np.ndarray
    VCE: np.ndarray
    converged: np.ndarray
    active: np.ndarray
    starts: np.ndarray
    sigma: np.ndarray


#: The figures a :class:`Corner` keeps of each :class:`Batch`.
CORNER_FIGURES: Final = ("f_osc", "gain", "IC", "VCE", "converged", "active", "starts", "sigma")


def _figures(batch: Batch) -> dict[str, np.ndarray]:
    """What a :class:`Corner` keeps of a batch (copies: the batch's memory can go)."""
    return {k: np.array(getattr(batch, k)) for k in CORNER_FIGURES}


def _corner(T_C: float, chunks: list[dict[str, np.ndarray]]) -> Corner:
    return Corner(T_C, **{k: np.concatenate([c[k] for c in chunks]) for k in CORNER_FIGURES})


@dataclass(frozen=True)
class Spread:
    #: Samples computed (fewer than ``requested`` when the run was stopped)
    samples: int
    seed: int
    temperatures: tuple[float, ...]
    margin: float
    yield_start: float
    yield_margin: float
    yield_by_temperature: dict[float, float]
    in_window: float | None
    window: tuple[float, float] | None
    f_percentiles: dict[int, float]
    gain_percentiles: dict[int, float]
    f_histogram: tuple[list[float], list[int]]
    gain_histogram: tuple[list[float], list[int]]
    worst_cases: list[dict]
    f_vs_temperature: list[tuple[float, float, float, float]]  # (T_C, p5, p50, p95)
    batches: list[Corner] = field(repr=False)
    draws: Draws = field(repr=False)
    #: (corners, samples): the sample starts there (gain > 1, active device)
    starts: np.ndarray = field(repr=False)
    #: with a varactor: the tuning voltages every temperature is solved at, V
    tuning_voltages: list[float] | None = None
    #: with a crystal: |R_neg|/R₁ at every corner (its lowest, and the corner)
    crystal_margin_min: float | None = None
    crystal_margin_yield: float | None = None
    crystal_worst: dict | None = None
    #: Samples asked for
    requested: int = 0
    #: The run was stopped (its progress callback returned False) before the end;
    #: every figure is of the ``samples`` computed.
    stopped: bool = False


def _percentiles(a: np.ndarray) -> dict[int, float]:
    a = a[np.isfinite(a)]
    if a.size == 0:
        return {p: math.nan for p in PERCENTILES}
    return {p: float(v) for p, v in zip(PERCENTILES, np.percentile(a, PERCENTILES), strict=True)}


def _histogram(a: np.ndarray) -> tuple[list[float], list[int]]:
    a = a[np.isfinite(a)]
    if a.size == 0:
        return [], []
    counts, edges = np.histogram(a, bins=HISTOGRAM_BINS)
    return edges.tolist(), counts.tolist()


def monte_carlo(
    design: Design,
    samples: int = DEFAULT_SAMPLES,
    seed: int = 1,
    margin: float = MARGINAL_BELOW,
    window: tuple[float, float] | None = None,
    progress: Callable[[float], bool] | None = None,
) -> Spread:
    """Startup yield and spread of f_osc and loop gain over tolerances and temperature.

    The samples are computed in chunks of :data:`CHUNK_SAMPLES`, every
    temperature corner of a chunk before the next chunk.  ``progress``, if
    given, is called with the fraction of the work done (0 … 1) after each
    batch (one chunk at one corner); when it returns ``False`` the run stops
    once the chunk under way has all its corners, and every figure is of the
    chunks done (``stopped`` set, ``samples`` their count).
    """
    requested = samples
    if window is not None and not 0 < window[0] < window[1]:
        raise SpreadError(f"the frequency window must satisfy 0 < low < high, got {window}")
    draws = draw(design, samples, seed)
    prepared = _prepare(design)
    corners = _corners(design, draws)
    band_n = min(samples, TEMPERATURE_BAND_SAMPLES)
    lo, hi = design.tolerances.T_min, design.tolerances.T_max
    band_temperatures = np.linspace(lo, hi, TEMPERATURE_STEPS if hi > lo else 1)
    own_V = None if design.varactor is None else design.varactor.V_tune
    prepared.start_at([*corners, *((float(T), own_V) for T in band_temperatures)])
    work = samples * len(corners) + band_n * len(band_temperatures)
    done_work = 0
    chunks: list[list[dict[str, np.ndarray]]] = [[] for _ in corners]
    margin_chunks: list[list[tuple[np.ndarray, np.ndarray]]] = [[] for _ in corners]
    done = 0
    stopped = False
    for start in range(0, samples, CHUNK_SAMPLES):
        stop = min(samples, start + CHUNK_SAMPLES)
        part = _subset(draws, start, stop)
        n = stop - start
        for k, (T, V) in enumerate(corners):
            vals = values_at(design, part, T)
            if V is not None:
                vals = {**vals, "V_tune": V}
            batch = analyse_batch(design, vals, T, prepared)
            chunks[k].append(_figures(batch))
            if design.crystal is not None:
                margin_chunks[k].append(
                    crystal_margins(design, {**part_values(design), **vals}, batch.solution)
                )
            del batch
            done_work += n
            if progress is not None and progress(done_work / work) is False:
                stopped = True  # the chunk's other corners are finished first
        done += n
        if stopped:
            break
    draws = _subset(draws, 0, done)
    batches = [_corner(T, c) for (T, _V), c in zip(corners, chunks, strict=True)]
    crystal_margin = [
        (np.concatenate([a for a, _r in m]), np.concatenate([r for _a, r in m]))
        for m in margin_chunks
        if m
    ]
    del chunks, margin_chunks
    samples = done
    gains = np.stack([b.gain for b in batches])  # (corners, samples)
    active = np.stack([b.active for b in batches])
    started = np.stack([b.starts for b in batches])
    margin_ok = (gains > margin) & active
    # the frequency figures at the design's own tuning voltage (every corner without a varactor)
    own = [i for i, (_T, V) in enumerate(corners) if own_V == V]
    freqs = np.stack([batches[i].f_osc for i in own])
    in_window = None
    if window is not None:
        inside = (freqs >= window[0]) & (freqs <= window[1])
        in_window = float(np.mean(np.all(inside & started[own], axis=0)))
    worst = []
    min_gain = np.min(gains, axis=0)
    for i in np.argsort(min_gain)[:WORST_CASES]:
        k = int(np.argmin(gains[:, i]))
        worst.append(
            {
                "sample": int(i),
                "T_C": corners[k][0],
                "V_tune": corners[k][1],
                "gain": float(gains[k, i]),
                "f_osc": _finite(batches[k].f_osc[i]),
                "parts": {p: float(v[i]) for p, v in draws.values.items()},
            }
        )
    band: list[tuple[float, float, float, float]] = []
    if not stopped:
        band_draws = draw(design, band_n, seed)
        band = _band(design, band_draws, band_temperatures, prepared)
        if progress is not None:
            progress(1.0)
    return Spread(
        samples=samples,
        seed=seed,
        temperatures=draws.temperatures,
        margin=margin,
        yield_start=float(np.mean(np.all(started, axis=0))),
        yield_margin=float(np.mean(np.all(margin_ok, axis=0))),
        yield_by_temperature={
            T: float(np.mean(np.all(started[[c[0] == T for c in corners]], axis=0)))
            for T in draws.temperatures
        },
        in_window=in_window,
        window=window,
        f_percentiles=_percentiles(freqs.ravel()),
        gain_percentiles=_percentiles(gains.ravel()),
        f_histogram=_histogram(freqs.ravel()),
        gain_histogram=_histogram(gains.ravel()),
        worst_cases=worst,
        f_vs_temperature=band,
        batches=batches,
        draws=draws,
        starts=started,
        tuning_voltages=_tuning_voltages(design),
        **_crystal_corners(crystal_margin, corners, draws),
        requested=requested,
        stopped=stopped,
    )


def _finite(x) -> float | None:
    return float(x) if np.isfinite(x) else None


def _tuning_voltages(design: Design) -> list[float] | None:
    """With a varactor: V_min, the middle, V_max and the design's own V_tune, V."""
    v = design.varactor
    if v is None:
        return None
    return sorted({v.V_min, 0.5 * (v.V_min + v.V_max), v.V_max, v.V_tune})


def _corners(design: Design, draws: Draws) -> list[tuple[float, float | None]]:
    """(temperature, tuning voltage) of every corner: each temperature, and with a
    varactor each at every tuning voltage of :func:`_tuning_voltages` (yield = starts
    at every one)."""
    tunes: list[float | None] = list(_tuning_voltages(design) or [None])
    return [(T, V) for T in draws.temperatures for V in tunes]


def _crystal_corners(margins: list[np.ndarray], corners, draws: Draws) -> dict:
    """The crystal's |R_neg|/R₁ over every corner: lowest, the fraction above the rule
    everywhere, and the worst corner (sample, temperature, margin, R_neg)."""
    if not margins:
        return {}
    m = np.stack([a for a, _r in margins])  # (corners, samples)
    r = np.stack([b for _a, b in margins])
    filled = np.where(np.isfinite(m), m, 0.0)
    k, i = np.unravel_index(int(np.argmin(filled)), filled.shape)
    return {
        "crystal_margin_min": float(filled.min()),
        "crystal_margin_yield": float(np.mean(np.all(filled >= NEGATIVE_R_RULE, axis=0))),
        "crystal_worst": {
            "sample": int(i),
            "T_C": corners[k][0],
            "margin": float(filled[k, i]),
            "R_neg": float(r[k, i]) if np.isfinite(r[k, i]) else None,
            "parts": {p: float(v[i]) for p, v in draws.values.items()},
        },
    }


def spread_result(
    design: Design,
    samples: int = DEFAULT_SAMPLES,
    seed: int = 1,
    margin: float = MARGINAL_BELOW,
    window: tuple[float, float] | None = None,
    progress: Callable[[float], bool] | None = None,
):
    """Monte Carlo and ranked sensitivities as the result contract (CLI and API);
    ``progress`` is as in :func:`monte_carlo`."""
    return spread_out(design, monte_carlo(design, samples, seed, margin, window, progress))


def spread_out(design: Design, r: Spread):
    """A :func:`monte_carlo` run of ``design`` with the ranked sensitivities, as the
    result contract."""
    from ringwise.analysis.sensitivity import sensitivities
    from ringwise.result import (
        HistogramOut,
        PercentilesOut,
        SensitivityOut,
        SpreadOut,
        SpreadResult,
        TemperaturePointOut,
        WorstCaseOut,
        from_attributes,
    )

    tol = design.tolerances
    sens = []
    for s in sensitivities(design):
        t = {"beta": math.log(tol.beta_ratio) / 2, "IS": math.log(tol.IS_ratio) / 2}.get(
            s.part, tol.of(s.part) if s.part in TOLERANCED_PARTS else 0.0
        )
        sens.append(
            SensitivityOut(
                part=s.part,
                value=s.value,
                tolerance=t,
                S_f=s.S_f,
                S_gain=s.S_gain,
                f_spread=abs(s.S_f) * t if s.S_f is not None else None,
                gain_spread=abs(s.S_gain) * t if s.S_gain is not None else None,
            )
        )
    sens.sort(key=lambda s: -((s.f_spread or 0.0) + (s.gain_spread or 0.0)))

    def pct(d: dict[int, float]) -> PercentilesOut:
        return PercentilesOut(**{f"p{k}": v for k, v in d.items()})

    return SpreadResult(
        name=design.name,
        spread=from_attributes(
            SpreadOut,
            r,
            temperatures_C=list(r.temperatures),
            yield_by_temperature={f"{k:g}": v for k, v in r.yield_by_temperature.items()},
            window=list(r.window) if r.window else None,
            f_osc=pct(r.f_percentiles),
            gain=pct(r.gain_percentiles),
            f_histogram=HistogramOut(edges=r.f_histogram[0], counts=r.f_histogram[1]),
            gain_histogram=HistogramOut(edges=r.gain_histogram[0], counts=r.gain_histogram[1]),
            worst_cases=[WorstCaseOut(**w) for w in r.worst_cases],
            f_vs_temperature=[
                TemperaturePointOut(T_C=T, p5=a, p50=b, p95=c) for T, a, b, c in r.f_vs_temperature
            ],
            sensitivities=sens,
        ),
    )
