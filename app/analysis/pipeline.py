r"""The one small-signal pipeline, batched: every analysis that solves a circuit runs here.

For a batch of circuits of one structure (one topology, the same optional
parts) that differ only in values::

    part values ──► unit stamps (mna.linear_patterns, one matrix product)
                ──► DC Newton per member: junction limiting, source stepping (dc.solve_dc_batch)
                ──► device currents there (mna.device_currents) → region (criteria)
                ──► hybrid-π over arrays (npn.hybrid_pi)
                ──► return ratio and its zero-phase crossing (loop.find_oscillation)
                ──► :class:`BatchSolution`, every figure by name, arrays of shape (B,)

A single design is a batch of one (:func:`ringwise.analysis.operating.solve`);
sweeps, sensitivities, pushing and pulling, the threshold's trials and the
Monte Carlo spread are batches of many.  Nothing here knows which analysis
asked.

Part values are the design's own names (``RB1``, ``C2``, ``L``, ``Q_L``,
``Vcc``, ``beta``, ``IS`` at 25 °C, ``temperature_C`` …, see
:data:`ringwise.design.PARAMETERS`), SI units, as floats or arrays (B,).  The
coil's series loss follows from L, the tank capacitors and Q_L
(:func:`ringwise.circuit.topologies.coil_loss`); the transistor's parameters
from its 25 °C values and the temperature
(:func:`ringwise.circuit.topologies.device_params_at`).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Final

import numpy as np

from ringwise.analysis.criteria import ACTIVE_CODE, region_codes, starts
from ringwise.analysis.dc import solve_dc_batch
from ringwise.analysis.loop import LoopFigures, find_oscillation
from ringwise.circuit.mna import (
    LinearSystem,
    Patterns,
    SmallSignal,
    assemble_batch,
    device_currents,
    incidence_of,
    linear_patterns,
    small_signal,
)
from ringwise.circuit.netlist import NPNParams, Varactor
from ringwise.circuit.npn import HybridPi, JunctionState, hybrid_pi
from ringwise.circuit.topologies import (
    CHOKE,
    CHOKE_LOSS,
    CHOKE_SELF_C,
    TUNE_SUPPLY,
    VARACTOR,
    VARACTOR_RETURN,
    build,
    choke_loss,
    choke_self_capacitance,
    coil_loss,
    crystal_frequency,
    device_params_at,
    tank_capacitance,
    varactor_branch,
)
from ringwise.design import PARAMETERS, Design, get_param

#: The tank capacitors whose series combination sets the ideal resonance.
TANK_CAPACITORS: Final = ("C1", "C2", "C3")
#: Parts a member may leave out of its structure's netlist (stamped open).
OPTIONAL_PARTS: Final = ("R_load",)

PartValues = Mapping[str, "float | np.ndarray | None"]


def part_values(design: Design) -> dict[str, float | None]:
    """Every part and device value of ``design`` by its parameter name (SI; °C)."""
    values = {name: get_param(design, name) for name in PARAMETERS}
    values["temperature_C"] = design.temperature_C
    if design.crystal is not None:
        values["L_x1"] = design.crystal.L1  # entered, or from f_xs
    if design.varactor is not None:
        values["varactor_place"] = design.varactor.place  # fixed by the structure
    return values


def structure_of(design: Design) -> tuple:
    """What fixes the netlist's shape: the form, the collector feed and which
    optional parts are present."""
    return (
        design.topology,
        design.choke_fed,
        design.choke_fed and design.bias.f_ch is not None,
        design.tank.C3 is not None,
        design.load.R_load is not None,
        design.load.C_load is not None,
        design.crystal is not None,
        None if design.varactor is None else design.varactor.place,
    )


def patterns_of_structure(design: Design) -> Patterns:
    """The unit stamps of ``design``'s structure, remembered per structure (the
    stamps depend on where the parts sit, not on their values)."""
    return _structure_patterns(structure_of(design), design)


_STRUCTURES: dict[tuple, Patterns] = {}


def _structure_patterns(key: tuple, design: Design) -> Patterns:
    found = _STRUCTURES.get(key)
    if found is None:
        found = _STRUCTURES.setdefault(key, linear_patterns(build(design)))
    return found


def _array(value, batch: int) -> np.ndarray:
    """``value`` as a float array of shape (batch,)."""
    if isinstance(value, np.ndarray) and value.shape == (batch,):
        return value
    return np.full(batch, value, dtype=float)


def _value(value, _batch: int):
    """A stamp value: a float shared by every member, or one per member (B,)."""
    return value if isinstance(value, np.ndarray) and value.ndim else float(value)


def stamp_values(
    patterns: Patterns, values: PartValues, batch: int
) -> dict[tuple[str, str], np.ndarray]:
    """Stamp values (1/R, C, R_s, L, V) of every term of ``patterns`` from part values.

    A part the structure has but a member leaves out (``None`` or NaN) is
    open: zero conductance, zero capacitance.
    """
    C_s = _tank_capacitance(values, batch, _value)
    out: dict[tuple[str, str], np.ndarray | float] = {}
    varactor = None
    for name, fld, _target, _M in patterns.terms:
        if name == VARACTOR:
            varactor = varactor or _varactor_stamps(values, batch)
            out[(name, fld)] = varactor[fld]
        elif name == TUNE_SUPPLY:
            out[(name, fld)] = _value(values["V_tune"], batch)
        elif name == VARACTOR_RETURN:
            out[(name, fld)] = 1.0 / _value(values["R_tune"], batch)
        elif name == CHOKE:
            out[(name, fld)] = _value(values["L_ch"], batch) if fld == "L" else 0.0
        elif name == CHOKE_LOSS:
            if _present(values, "C_x1"):  # at the crystal's resonance (no coil)
                R_p = values["Q_ch"] * values["L_ch"] * 2.0 * np.pi * f_ideal_of(values, batch)
            else:
                R_p = choke_loss(values["L_ch"], values["Q_ch"], values["L"], C_s)
            out[(name, fld)] = 1.0 / _value(R_p, batch)
        elif name == CHOKE_SELF_C:
            out[(name, fld)] = _value(choke_self_capacitance(values["L_ch"], values["f_ch"]), batch)
        elif fld == "G_R":
            R = values[name] if _present(values, name) else math.inf
            out[(name, fld)] = 1.0 / _value(R, batch)  # an open (R = ∞) stamps 0 S
        elif fld == "C":
            out[(name, fld)] = _value(values[name] if _present(values, name) else 0.0, batch)
        elif fld == "L":
            L = values["L_x1"] if _present(values, "C_x1") else values["L"]
            out[(name, fld)] = _value(L, batch)
        elif fld == "R_s" and _present(values, "C_x1"):
            out[(name, fld)] = _value(values["R_x1"], batch)  # the crystal's motional arm
        elif fld == "R_s":
            out[(name, fld)] = _value(coil_loss(values["L"], C_s, values["Q_L"]), batch)
        elif fld == "V":
            out[(name, fld)] = _value(values["Vcc"], batch)
    return out


def _tank_capacitance(values: PartValues, batch: int, as_value) -> np.ndarray | float:
    """The capacitance the coil resonates with (the varactor branch at its bias included)."""
    C = [as_value(values[c], batch) if _present(values, c) else None for c in TANK_CAPACITORS]
    if not _present(values, "C_j0"):
        return tank_capacitance(*C)
    C_b = varactor_branch(
        *(as_value(values[k], batch) for k in ("C_v", "C_j0", "phi_j", "m_j", "V_tune"))
    )
    return tank_capacitance(*C, C_b, values.get("varactor_place") or "across-L")


def _varactor_stamps(values: PartValues, batch: int) -> dict[str, np.ndarray | float]:
    """The varactor's stamp values by field: C(V_tune) ("C_b"), R_v·C(V_tune) ("RC"),
    the row's offset ("V0"); floats when every member shares them, else arrays (B,).

    One element holds every member's tuning voltage when the junction law is
    shared (the junction law takes an array of voltages), else one element
    per member.
    """
    # a law the members share (as joined batches hold it: equal arrays) is one float
    law = [_shared(values[k]) for k in ("C_j0", "phi_j", "m_j")]
    V = values["V_tune"]
    if all(np.ndim(a) == 0 for a in law):
        el = Varactor("", "", "", *(float(a) for a in law), np.asarray(V, float))  # type: ignore[arg-type]
        C_b, offset = el.C_bias, el.offset
    else:
        rows = zip(
            *np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (*law, V))), strict=True
        )
        els = [Varactor("", "", "", *(float(a) for a in row)) for row in rows]
        C_b = np.array([el.C_bias for el in els])
        offset = np.array([el.offset for el in els])
    return {
        "C_b": _value(C_b, batch),
        "RC": _value(C_b * values["R_v"], batch),
        "V0": _value(offset, batch),
    }


def _shared(value):
    """``value`` as one float when it is an array whose members are all equal."""
    if np.ndim(value) and value.size and np.all(value == value.flat[0]):
        return float(value.flat[0])
    return value


def _present(values: PartValues, name: str) -> bool:
    v = values.get(name)
    return v is not None


def f_ideal_of(values: PartValues, batch: int) -> np.ndarray:
    """1/(2π√(L·C_s)) of every member, Hz."""
    C_s = _tank_capacitance(values, batch, _array)
    if _present(values, "C_x1"):
        return crystal_frequency(
            _array(values["L_x1"], batch), _array(values["C_x1"], batch),
            _array(values["C_x0"], batch), C_s,
        )  # fmt: skip
    return 1.0 / (2.0 * np.pi * np.sqrt(_array(values["L"], batch) * C_s))


@dataclass(frozen=True)
class BatchSolution:
    """Every member's small-signal analysis, by name; arrays of shape (B,).

    Attributes
    ----------
    system : linear matrices, G (B, n, n), C (B, n, n), b (B, n)
    params : transistor parameters at each member's temperature
    x : DC solution (B, n), NaN where the DC solve failed
    converged : the DC solve converged
    stepped : it needed source stepping
    junction : the transport model's currents and derivatives at DC, A and S
    vbe, vce : controlling voltages at DC, V
    region : index into ``criteria.REGIONS`` (a failed DC solve counts as cut off)
    hybrid : hybrid-π elements (S, F)
    ss : the linearised circuit with its loop broken
    loop : the loop at its zero-phase crossing (NaN where none)
    f_ideal : the tank's ideal resonance, Hz
    """

    system: LinearSystem
    params: NPNParams
    x: np.ndarray
    converged: np.ndarray
    stepped: np.ndarray
    junction: JunctionState
    vbe: np.ndarray
    vce: np.ndarray
    region: np.ndarray
    hybrid: HybridPi
    ss: SmallSignal
    loop: LoopFigures
    f_ideal: np.ndarray

    @property
    def active(self) -> np.ndarray:
        return self.region == ACTIVE_CODE

    @property
    def gain(self) -> np.ndarray:
        """|T(f_osc)|, 0 where there is no zero-phase crossing."""
        return np.where(np.isfinite(self.loop.f_osc), self.loop.gain, 0.0)

    @property
    def starts(self) -> np.ndarray:
        return starts(self.gain, self.active)


@dataclass(frozen=True)
class MemberFigures:
    """What a few members of a batch tell another analysis, arrays (members,):
    f_osc (Hz, NaN where no crossing or no DC point), the loop gain (0 there)
    and whether each starts."""

    f_osc: np.ndarray
    gain: np.ndarray
    starts: np.ndarray

    @classmethod
    def of(cls, sol: BatchSolution, first: int = 0) -> MemberFigures:
        """Members ``first`` … of ``sol``."""
        return cls(sol.loop.f_osc[first:], sol.gain[first:], sol.starts[first:])

    def part(self, first: int) -> MemberFigures:
        """Members ``first`` … of these."""
        return MemberFigures(self.f_osc[first:], self.gain[first:], self.starts[first:])


def solve_values(
    patterns: Patterns,
    values: PartValues,
    batch: int,
    x0: np.ndarray | None = None,
    f_guess: np.ndarray | float | None = None,
    guess_f_ideal: float | None = None,
) -> BatchSolution:
    """The pipeline for ``batch`` members of one structure given their part values.

    ``x0`` (n,) or (B, n) starts the DC Newton (default: each member's own
    initial guess); ``f_guess`` (Hz) starts the loop search (default: each
    member's ideal resonance).  ``guess_f_ideal`` is the ideal resonance of
    the circuit ``f_guess`` was found for: each member's search then starts
    at ``f_guess`` moved with its own ideal resonance (a tuning sweep, whose
    members' f_osc follow their tanks).
    """
    system = assemble_batch(patterns, stamp_values(patterns, values, batch))
    params = device_params_at(
        *(values[k] for k in ("IS", "beta", "VA", "fT", "C_mu", "temperature_C"))
    )
    if system.b.shape != (batch, patterns.layout.size):
        b = np.broadcast_to(system.b, (batch, patterns.layout.size))
        system = LinearSystem(system.layout, system.G, system.C, b, patterns.devices)
    dc = solve_dc_batch(system, params, x0, batch)
    x_ok = np.where(dc.converged[:, None], dc.x, 0.0)
    dev = device_currents(incidence_of(system), x_ok, params)
    region = np.where(dc.converged, region_codes(dev.junction.I_F, dev.junction.I_R), 2)
    hp = hybrid_pi(dev.junction, params.fT, params.C_mu)
    ss = small_signal(system, hp)
    f_ideal = f_ideal_of(values, batch)
    guess = f_ideal if f_guess is None else _array(f_guess, batch)
    if f_guess is not None and guess_f_ideal is not None:
        guess = guess * (f_ideal / guess_f_ideal)
    loop = find_oscillation(ss, f_ideal, guess)
    if not np.all(dc.converged):
        loop = LoopFigures(
            *(np.where(dc.converged, a, np.nan) for a in _loop_arrays(loop)),
        )
    return BatchSolution(
        system=system,
        params=params,
        x=dc.x,
        converged=dc.converged,
        stepped=dc.stepped,
        junction=dev.junction,
        vbe=dev.vbe,
        vce=dev.vce,
        region=region,
        hybrid=hp,
        ss=ss,
        loop=loop,
        f_ideal=f_ideal,
    )


def _loop_arrays(loop: LoopFigures) -> tuple[np.ndarray, ...]:
    return (
        loop.f_osc,
        loop.T,
        loop.gain,
        loop.phase_slope,
        loop.Q_loaded,
        loop.Z_out,
        loop.dT_ds,
    )


def stack_values(designs: Sequence[Design]) -> dict[str, np.ndarray | float | None]:
    """Part values of several designs, one array (B,) per part.

    A part no design has is ``None``; an optional part (:data:`OPTIONAL_PARTS`)
    that only some leave out is infinite (open) for those.  A single design
    keeps its plain floats.
    """
    rows = [part_values(d) for d in designs]
    if len(rows) == 1:
        return dict(rows[0])
    out: dict[str, np.ndarray | float | None] = {}
    for name in rows[0]:
        column = [r[name] for r in rows]
        if isinstance(column[0], str):  # a choice the structure fixes (the varactor's place)
            out[name] = column[0]
        elif all(v is None for v in column):
            out[name] = None
        elif name in OPTIONAL_PARTS:
            out[name] = np.array([np.inf if v is None else v for v in column], dtype=float)
        else:
            out[name] = np.array([np.nan if v is None else v for v in column], dtype=float)
    return out


def changed_values(
    values: PartValues, changes: Sequence[Mapping[str, float | None]]
) -> dict[str, np.ndarray | float | str | None]:
    """Part values of ``len(changes)`` members: ``values`` with each member's
    changes (parameter name -> value; ``None`` leaves an optional part out).

    The same numbers as :func:`stack_values` of the changed designs, without
    building and validating a design per member: a changed part is an array
    (B,), the others stay shared.
    """
    out: dict[str, np.ndarray | float | str | None] = dict(values)
    for name in dict.fromkeys(k for change in changes for k in change):
        missing = np.inf if name in OPTIONAL_PARTS else np.nan
        column = [change.get(name, values.get(name)) for change in changes]
        out[name] = np.array([missing if v is None else v for v in column], dtype=float)
    return out


def join_values(blocks: Sequence[tuple[PartValues, int]]) -> dict[str, np.ndarray | str | None]:
    """Part values of several batches of one structure as one batch (members in order).

    Each block is (values, its batch size); a part no block has stays
    ``None``, an optional part (:data:`OPTIONAL_PARTS`) a block leaves out is
    infinite (open) there, any other missing part NaN.
    """
    out: dict[str, np.ndarray | str | None] = {}
    for name in dict.fromkeys(k for values, _n in blocks for k in values):
        column = [values.get(name) for values, _n in blocks]
        if isinstance(column[0], str):  # a choice the structure fixes (the varactor's place)
            out[name] = column[0]
            continue
        if all(v is None for v in column):
            out[name] = None
            continue
        missing = np.inf if name in OPTIONAL_PARTS else np.nan
        out[name] = np.concatenate(
            [
                _array(missing if v is None else v, n)
                for v, (_values, n) in zip(column, blocks, strict=True)
            ]
        )
    return out


def solve_designs(
    designs: Sequence[Design],
    x0: np.ndarray | None = None,
    f_guess: np.ndarray | float | None = None,
    like: Design | None = None,
) -> BatchSolution:
    """The pipeline for several designs of one structure (that of ``like``, default the first).

    A design may leave out an optional part the structure has (an open load):
    it is stamped open.
    """
    patterns = patterns_of_structure(like or designs[0])
    return solve_values(patterns, stack_values(designs), len(designs), x0, f_guess)
