r"""The oscillator's periodic steady state and every figure that depends on the swing.

The orbit comes from :func:`ringwise.analysis.steady.shoot` on the circuit's
transient equations (:func:`ringwise.analysis.transient.transient_system`:
the same netlist, device function and stepper as the time-domain run).

Start: the small-signal circuit's critical eigenvector (the growing pole
pair of :mod:`ringwise.analysis.poles`), scaled to the fixed-bias
describing-function drive (:func:`ringwise.analysis.startup.fixed_bias_drive`)
and placed at a falling zero crossing of v_BE, carried a few periods by the
stepper so that the fast part of the state (the tank) lies near its own
orbit; Newton then finds the slow bias shift and the exact amplitude.  After
an edit the previous design's orbit (same circuit layout) is the start,
shifted by the change of the DC point: usually two Newton steps.

Figures, from the N samples of one period (exact for a periodic signal):
fundamental and harmonics by the DFT; averages (I_C, V_E) as period means;
V_CE,min from the band-limited interpolation of the samples; powers as
period means of v·i for each part; DC input power V_cc·⟨I_supply⟩;
efficiency = (coil loss + load power)/DC input power.
"""

from __future__ import annotations

import cmath
import math
import threading
from dataclasses import dataclass, field
from typing import Final

import numpy as np
import scipy.linalg

from ringwise.analysis import floquet
from ringwise.analysis.operating import Solved
from ringwise.analysis.startup import fixed_bias_drive
from ringwise.analysis.steady import (
    STEPS_PER_PERIOD,
    Orbit,
    ShootingError,
    _trajectory,
    neighbour_period,
    shoot,
    steps_needed,
    uniform_grid,
    unwarped_frequency,
    warped_period,
)
from ringwise.analysis.stepper import Dynamics, _Stepper, circuit_dynamics
from ringwise.analysis.transient import transient_system
from ringwise.circuit.mna import G_MIN, LinearSystem, nonlinear_residual
from ringwise.circuit.netlist import Capacitor, DCSupply, Inductor, Resistor
from ringwise.circuit.topologies import T1

#: Harmonics reported (2nd … HARMONICS-th).
HARMONICS: Final = 7
#: Periods carried by the stepper from the cold start before Newton (one lines
#: the tank up with its orbit; more cost more than the Newton steps they
#: save); if Newton fails from there, SECOND_PERIODS more, then RETRY_PERIODS
#: (hard-driven designs, loop gains of tens, need the longer ways in).
PRE_PERIODS: Final = 1
SECOND_PERIODS: Final = 3
RETRY_PERIODS: Final = 40
#: The start's collector swing is at most this fraction of the DC V_CE.
START_HEADROOM: Final = 0.8
#: Step halvings allowed on the way in (see :func:`steady._trajectory`).
PRE_SUBSTEPS: Final = 6
#: A singular value of the DC Jacobian (G_MIN taken out) below this fraction
#: of the largest marks a DC-floating direction.
FLOATING_RCOND: Final = 1e-9
#: Entries of a null vector below this are zero.
NULL_ENTRY: Final = 1e-6
#: A remembered orbit is used as the start only if its period is within this
#: factor of the new design's small-signal period.
WARM_PERIOD_RATIO: Final = 1.5
#: Orbits remembered for warm starts (one per circuit layout).
WARM_CACHE_SIZE: Final = 16


@dataclass(frozen=True)
class PartPower:
    """One part's share of the steady state: RMS signal current (A), peak voltage
    across it, DC plus signal (V), and average dissipation (W)."""

    part: str
    I_rms: float
    V_peak: float
    P: float


@dataclass(frozen=True)
class SteadyState:
    """The periodic steady state of a design (SI units) and its stability.

    ``behaviour`` is one of :data:`ringwise.analysis.floquet.BEHAVIOURS`;
    with ``no-orbit`` every figure is ``None`` and ``reason`` says why.
    Amplitudes are fundamental peaks; ``harmonics_dBc`` the 2nd … 7th at the
    output node; ``VE_shift`` the average emitter voltage minus its DC value.
    ``waveforms`` hold one period (``t``, every node voltage by name, and
    ``i_L``, the coil current).
    """

    behaviour: str
    reason: str | None
    orbit: Orbit | None = field(default=None, repr=False)
    f: float | None = None
    amp_out: float | None = None
    amp_be: float | None = None
    amp_ce: float | None = None
    thd: float | None = None
    harmonics_dBc: list[float | None] = field(default_factory=list)
    IC_avg: float | None = None
    VE_avg: float | None = None
    VE_shift: float | None = None
    VCE_min: float | None = None
    P_tank: float | None = None
    P_load: float | None = None
    P_in: float | None = None
    efficiency: float | None = None
    multipliers: list[complex] = field(default_factory=list)
    trivial_multiplier: complex | None = None
    settle_cycles: float | None = None
    parts: list[PartPower] = field(default_factory=list)
    waveforms: dict[str, list[float]] = field(default_factory=dict, repr=False)


def no_orbit(reason: str) -> SteadyState:
    return SteadyState(behaviour=floquet.NO_ORBIT, reason=reason)


_warm: dict[tuple, tuple[np.ndarray, float, np.ndarray, int]] = {}
_warm_lock = threading.Lock()


def forget() -> None:
    """Drop the remembered orbits (benchmarks time cold starts with this)."""
    with _warm_lock:
        _warm.clear()


def _layout_key(system: LinearSystem) -> tuple:
    lay = system.layout
    return (tuple(lay.node), tuple(lay.branch))


def steady_state(solved: Solved, warm: bool = True) -> SteadyState:
    """The periodic steady state of a solved design, its figures and its multipliers.

    ``warm`` lets the solver start from the last orbit found for a circuit of
    the same layout (and remember this one).
    """
    if solved.op.region.value != "active" or solved.f_osc is None or solved.gain <= 1.0:
        return no_orbit(
            "the loop gain is below 1 or the transistor is not active: it does not start"
        )
    system, _x_kick = transient_system(solved)
    dyn = circuit_dynamics(system)
    scale = _scale(system, solved)
    floating = floating_groups(system, solved.op.x)
    key = _layout_key(system)
    T_small = warped_period(solved.f_osc)
    orbit = None
    if warm:
        with _warm_lock:
            previous = _warm.get(key)
        if previous is not None:
            x_prev, T_prev, dc_prev, steps = previous
            if 1.0 / WARM_PERIOD_RATIO < T_prev / T_small < WARM_PERIOD_RATIO:
                try:
                    start = x_prev + (solved.op.x - dc_prev)
                    orbit = _refined(dyn, start, T_prev, scale, floating, steps)
                except ArithmeticError:  # ShootingError, or a step's overflow
                    orbit = None
    if orbit is None:
        try:
            orbit = _cold(solved, dyn, scale, floating, T_small)
        except ArithmeticError as err:  # ShootingError, or a step's overflow
            return no_orbit(f"no periodic orbit was found ({err}); run the time-domain simulation")
    if warm:
        with _warm_lock:
            if len(_warm) >= WARM_CACHE_SIZE:
                _warm.pop(next(iter(_warm)))
            _warm[key] = (orbit.x[0].copy(), orbit.T, solved.op.x.copy(), orbit.N)
    return _figures(solved, system, dyn, orbit, scale, floating)


def neighbour_frequency(ss: SteadyState, solved: Solved, near: Solved) -> float | None:
    """The steady-state frequency of ``near`` (``solved`` with a part moved a little),
    to first order in the move, from ``ss`` (``solved``'s steady state): one period
    of the neighbour and one bordered solve (:func:`steady.neighbour_period`),
    not a shooting of its own.  ``None`` without an orbit, or when the neighbour
    does not start or its period cannot be stepped."""
    if ss.orbit is None or near.op.region.value != "active" or near.f_osc is None:
        return None
    system, _x_kick = transient_system(near)
    if _layout_key(system) != _layout_key(solved.system):
        raise ValueError("a neighbour must have the same circuit layout")
    dyn = circuit_dynamics(system)
    start = ss.orbit.x[0] + (near.op.x - solved.op.x)
    try:
        T = neighbour_period(
            ss.orbit, dyn, start, _scale(system, near), floating_groups(system, near.op.x)
        )
    except ArithmeticError:  # ShootingError, or a step's overflow
        return None
    return unwarped_frequency(T, ss.orbit.dtau)


def _scale(system: LinearSystem, solved: Solved) -> np.ndarray:
    """Weights of the unknowns: 1 for voltages, ω·L (Ω) for branch currents."""
    scale = np.ones(system.layout.size)
    L = solved.design.tank.L
    L = solved.netlist["L"].L if L is None else L  # a crystal without a coil: its motional L
    z = 2.0 * math.pi * (solved.f_osc or solved.tank.f_ideal) * L
    for idx in system.layout.branch.values():
        scale[idx] = z
    for el in system.varactors:  # its charge is in volts (q/C at the bias)
        scale[system.layout.branch[el.name]] = 1.0
    return scale


def floating_groups(system: LinearSystem, x_dc: np.ndarray) -> np.ndarray:
    """Indicator vectors (n, p) of the groups of nodes joined to ground only by G_MIN.

    The null space of the DC Jacobian with G_MIN taken out names the
    floating nodes; nodes joined through the Jacobian (a coil, say) form one
    group, whose voltages move together.
    """
    _F, J = nonlinear_residual(system, x_dc)
    lay = system.layout
    nodes = np.array(sorted(lay.node.values()))
    J = J.copy()
    J[nodes, nodes] -= G_MIN
    null = scipy.linalg.null_space(J, rcond=FLOATING_RCOND)
    free = {int(i) for i in nodes if np.any(np.abs(null[i]) > NULL_ENTRY)}
    node_set = set(nodes.tolist())
    groups: list[list[int]] = []
    seen: set[int] = set()
    for i in sorted(free):
        if i in seen:
            continue
        stack, group = [i], []
        while stack:
            k = stack.pop()
            if k in seen:
                continue
            seen.add(k)
            if k in free:
                group.append(k)
            linked = np.flatnonzero((J[k] != 0.0) | (J[:, k] != 0.0))
            stack += [int(j) for j in linked if j not in seen and (j in free or j not in node_set)]
        groups.append(group)
    U = np.zeros((lay.size, len(groups)))
    for c, group in enumerate(groups):
        U[group, c] = 1.0
    return U


def _signals(dyn: Dynamics, X: np.ndarray, phi: np.ndarray) -> np.ndarray:
    """The waveforms the grid must follow: the two controls and the first device current."""
    return np.column_stack((X @ dyn.W, phi[:, 0]))


#: Grid doublings tried after an orbit is found on a grid too coarse for it.
REFINE_ROUNDS: Final = 2


def _refined(
    dyn: Dynamics,
    x0: np.ndarray,
    T0: float,
    scale: np.ndarray,
    floating: np.ndarray,
    N: int,
) -> Orbit:
    """Shoot on N equal steps; if the orbit turns too sharply for them, on more."""
    orbit = shoot(dyn, x0, T0, scale, floating, uniform_grid(N))
    for _ in range(REFINE_ROUNDS):
        need = steps_needed(_signals(dyn, orbit.x, orbit.phi), orbit.N)
        if need <= orbit.N:
            break
        orbit = shoot(dyn, orbit.x[0], orbit.T, scale, floating, uniform_grid(need))
    return orbit


def _cold(
    solved: Solved,
    dyn: Dynamics,
    scale: np.ndarray,
    floating: np.ndarray,
    T0: float,
) -> Orbit:
    """Shooting from the critical eigenvector at the fixed-bias drive (see the module text)."""
    x0 = _eigen_start(solved, dyn)
    stepper = _Stepper(dyn)
    N = STEPS_PER_PERIOD
    h = T0 / N
    error: ShootingError | None = None
    ladder = ((PRE_PERIODS, False), (SECOND_PERIODS, False), (RETRY_PERIODS, True))
    for periods, middle in ladder:
        traj = _trajectory(stepper, x0, h, N * periods, PRE_SUBSTEPS)
        if traj is None:
            raise ShootingError("a trapezoidal step failed on the way in")
        X = traj[0]
        # On the retry, the mean of the last two period ends: on a
        # period-doubled motion the period-one orbit lies between the
        # alternating cycles.
        x0 = 0.5 * (X[-1] + X[-1 - N]) if middle else X[-1]
        try:
            return _refined(dyn, x0, T0, scale, floating, N)
        except ArithmeticError as err:
            error = ShootingError(str(err))
        x0 = X[-1]
    assert error is not None
    raise error


def _eigen_start(solved: Solved, dyn: Dynamics) -> np.ndarray:
    """DC point plus the critical eigenvector, v_BE at drive x·V_T, falling through its mean."""
    ss = solved.ss
    lam, vecs = scipy.linalg.eig(-ss.G_full, ss.C)
    w0 = 2.0 * math.pi * float(solved.f_osc or solved.tank.f_ideal)
    dist = np.where(np.isfinite(lam), np.abs(lam - 1j * w0), np.inf)
    v = vecs[:, int(np.argmin(dist))]
    v_be = complex(dyn.W[:, 0] @ v)
    v_ce = complex(dyn.W[:, 1] @ v)
    drive = fixed_bias_drive(solved.gain) or 1.0
    # no deeper than START_HEADROOM of V_CE into saturation at the start
    amp = min(drive * solved.VT, START_HEADROOM * solved.op.VCE * abs(v_be / v_ce))
    # v_be(t) = Re(a·v_be·e^{jωt}) = −amp·sin(ωt): at its mean and falling at t = 0
    a = 1j * amp / v_be
    return solved.op.x + (a * v).real


def _figures(
    solved: Solved,
    system: LinearSystem,
    dyn: Dynamics,
    orbit: Orbit,
    scale: np.ndarray,
    floating: np.ndarray,
) -> SteadyState:
    lay = system.layout
    X = orbit.x
    w = scale[orbit.dynamic]
    monodromy = (w[:, None] * orbit.monodromy) / w[None, :]
    fl = floquet.classify(monodromy, w * orbit.flow, floating.shape[1])
    v_be, v_ce = X @ dyn.W[:, 0], X @ dyn.W[:, 1]
    out = X[:, lay.node[T1]]
    spectra = orbit.fourier(np.column_stack((out, v_be, v_ce)), HARMONICS)
    spec_out = spectra[:, 0]
    fund = abs(spec_out[1])
    levels = np.abs(spec_out[2:])
    harmonics = [20.0 * math.log10(h / fund) if h > 0 else None for h in levels]
    thd = float(math.sqrt(float(np.sum(levels**2))) / fund)
    dev = system.devices[0]
    IC_avg = float(orbit.mean(orbit.phi[:, 0]))
    VE_avg = float(orbit.mean(X[:, lay.node[dev.e]]))
    parts, VCE_min = _parts(solved, system, orbit)
    P_tank = next(p.P for p in parts if p.part == "L")
    P_load = next((p.P for p in parts if p.part == "R_load"), 0.0)
    P_in = _input_power(solved, system, dyn, orbit)
    # one period of each waveform from the output's rising zero crossing (its
    # fundamental's), wherever the solver's phase condition left the orbit
    shift = _start_phase(spec_out[1])
    names = [*lay.node, "i_L", "v_be", "v_ce"]
    columns = [*lay.node.values(), lay.branch["L"]]
    waves = _shifted(np.vstack((X[:, columns].T, v_be, v_ce)), shift).tolist()
    waveforms = {"t": orbit.t.tolist(), **dict(zip(names, waves, strict=True))}
    return SteadyState(
        behaviour=fl.behaviour,
        reason=None,
        orbit=orbit,
        f=orbit.f,
        amp_out=float(fund),
        amp_be=float(abs(spectra[1, 1])),
        amp_ce=float(abs(spectra[1, 2])),
        thd=thd,
        harmonics_dBc=harmonics,
        IC_avg=IC_avg,
        VE_avg=VE_avg,
        VE_shift=VE_avg - solved.op.VE,
        VCE_min=VCE_min,
        P_tank=P_tank,
        P_load=P_load,
        P_in=P_in,
        efficiency=(P_tank + P_load) / P_in if P_in > 0 else None,
        multipliers=[complex(m) for m in fl.multipliers],
        trivial_multiplier=fl.trivial,
        settle_cycles=fl.settle_cycles,
        parts=parts,
        waveforms=waveforms,
    )


def _across(lay, X: np.ndarray, a: str, b: str) -> np.ndarray:
    return lay.v(X, a) - lay.v(X, b)


def _parts(solved: Solved, system: LinearSystem, orbit: Orbit) -> tuple[list[PartPower], float]:
    """Every R, C and L, and the transistor: RMS signal current, peak voltage,
    dissipation; and the lowest V_CE (from the same band-limited extremes)."""
    lay = system.layout
    X = orbit.x
    rows: list[tuple[str, float, float]] = []  # (part, I_rms, P)
    volts: list[np.ndarray] = []
    for el in solved.netlist:
        if isinstance(el, Resistor):
            if not np.isfinite(el.R):
                continue
            v = _across(lay, X, el.a, el.b)
            i_ac = (v - orbit.mean(v)) / el.R
            rows.append((el.name, _rms(orbit, i_ac), float(orbit.mean(v * v)) / el.R))
        elif isinstance(el, Capacitor):
            v = _across(lay, X, el.a, el.b)
            # i = C dv/dt, its step average C·Δv/h_k (the trapezoidal rule's own)
            i_step = el.C * np.diff(v) / orbit.h
            rows.append((el.name, float(math.sqrt(float(np.dot(orbit.dtau, i_step**2)))), 0.0))
        elif isinstance(el, Inductor):
            i = X[:, lay.branch[el.name]]
            v = _across(lay, X, el.a, el.b)
            rows.append(
                (el.name, _rms(orbit, i - orbit.mean(i)), el.R_s * float(orbit.mean(i * i)))
            )
        else:
            continue
        volts.append(v)
    dev = system.devices[0]
    IC, IB = orbit.phi[:, 0], orbit.phi[:, 1]
    v_be = _across(lay, X, dev.b, dev.e)
    v_ce = _across(lay, X, dev.c, dev.e)
    rows.append(
        (dev.name, _rms(orbit, IC - orbit.mean(IC)), float(orbit.mean(IC * v_ce + IB * v_be)))
    )
    volts.append(v_ce)
    V = np.stack(volts)
    # largest |v| of every part at once: the band-limited maxima of v and −v
    both = band_limited_max(np.concatenate((V, -V)))
    peaks = np.maximum(both[: len(V)], both[len(V) :])
    parts = [
        PartPower(name, I_rms, float(pk), P)
        for (name, I_rms, P), pk in zip(rows, peaks, strict=True)
    ]
    return parts, -float(both[-1])  # the last row: −v_CE


#: The band-limited interpolant is evaluated on a grid this many times finer
#: than the orbit's, and its extreme refined by a parabola through three points.
UPSAMPLE: Final = 8


def band_limited_max(values: np.ndarray) -> np.ndarray | float:
    """Largest value of the trigonometric interpolant of one period of samples.

    ``values`` are N+1 samples on the orbit's uniform grid (the last repeats the
    first) along the last axis, one row per signal.  The largest sample depends
    on where the grid falls on the waveform (by up to (ωh)²/8 of its swing);
    the interpolant's maximum does not — so the figure is the same whatever
    phase the solver left the orbit at.  The interpolant is evaluated on a
    grid UPSAMPLE times finer (zero-padded FFT) and the peak refined by the
    parabola through its three highest neighbours (error of order
    (2π/(UPSAMPLE·N))⁴ of the swing).
    """
    v = np.asarray(values, dtype=float)[..., :-1]
    N = v.shape[-1]
    c = np.fft.rfft(v, axis=-1)
    if N % 2 == 0:
        c[..., -1] *= 0.5  # the Nyquist term, split between ±N/2 when padded
    fine = np.fft.irfft(c, UPSAMPLE * N, axis=-1) * UPSAMPLE
    i = np.argmax(fine, axis=-1)
    M = fine.shape[-1]
    rows = np.arange(fine.shape[0])[:, None] if fine.ndim > 1 else None
    idx = np.stack(((i - 1) % M, i, (i + 1) % M), axis=-1)
    a, b, d = np.moveaxis(
        np.take_along_axis(fine, idx, axis=-1) if rows is not None else fine[idx], -1, 0
    )
    curv = a - 2.0 * b + d
    with np.errstate(divide="ignore", invalid="ignore"):
        top = np.where(curv < 0.0, b - 0.125 * (d - a) ** 2 / curv, b)
    top = np.maximum(top, v.max(axis=-1))
    return float(top) if np.ndim(top) == 0 else top


def _start_phase(c1: complex) -> float:
    """Fraction of a period from the orbit's start to the rising zero crossing of the
    fundamental whose complex peak amplitude (c_k = (2/T)∫v e^{−jkωt}) is ``c1``."""
    # v ≈ |c1|cos(ωt + arg c1) rises through zero where ωt + arg c1 = −π/2
    return ((-0.5 * math.pi - cmath.phase(c1)) / (2.0 * math.pi)) % 1.0


def _shifted(values: np.ndarray, shift: float) -> np.ndarray:
    """One period of samples (N+1, uniform grid, along the last axis; one row per
    signal) advanced by ``shift`` periods, by the trigonometric interpolant
    (exact for whole steps)."""
    v = np.asarray(values, dtype=float)[..., :-1]
    N = v.shape[-1]
    c = np.fft.rfft(v, axis=-1)
    c *= np.exp(2j * math.pi * np.arange(c.shape[-1]) * shift)
    if N % 2 == 0:
        c[..., -1] = c[..., -1].real  # the Nyquist term stays real (a cosine at the grid's rate)
    out = np.fft.irfft(c, N, axis=-1)
    return np.concatenate((out, out[..., :1]), axis=-1)


def _rms(orbit: Orbit, v: np.ndarray) -> float:
    return float(math.sqrt(float(orbit.mean(v * v))))


def _input_power(solved: Solved, system: LinearSystem, dyn: Dynamics, orbit: Orbit) -> float:
    """V_cc times the average current the supply delivers, W.

    From Kirchhoff's current law at the supply node: the resistive and
    device currents leaving it (its capacitive currents average to zero over
    a period).
    """
    lay = system.layout
    total = 0.0
    for supply in solved.netlist.of_kind(DCSupply):
        i = lay.node[supply.pos]
        k = lay.branch[supply.name]
        row = system.G[i].copy()
        row[k] = 0.0
        current = orbit.x @ row + orbit.phi @ dyn.P[i]
        total += supply.V * float(orbit.mean(current))
    return total
