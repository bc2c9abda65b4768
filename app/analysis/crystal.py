r"""A crystal in place of the coil: frequency, load capacitance, negative resistance, drive.

The crystal is the Butterworth–Van Dyke model in the one netlist
(:func:`ringwise.circuit.topologies.build`): motional arm R₁, L₁, C₁ (the arm
keeps the coil's netlist name ``L``) shunted by C₀, in the coil's place of
the resonator triangle — across collector–base in the common-emitter form
(the Pierce arrangement), from base to ground in the common-collector form
(the crystal Colpitts), across the collector side in common-base.  Every
analysis therefore treats it as any tank part: DC (a DC open), loop,
poles, threshold, spread, transient and the periodic steady state.

Closed forms (lossless; IEC 60444 and common practice, from memory):

.. math:: f_s = \frac{1}{2\pi\sqrt{L_1 C_1}},\qquad
          f_p = f_s\sqrt{1 + C_1/C_0},\qquad
          f_L \approx f_s\Bigl(1 + \frac{C_1}{2(C_0 + C_L)}\Bigr),

and the pulling sensitivity :math:`df/dC_L = -f_s C_1 / (2 (C_0 + C_L)^2)`.

The circuit side, at f_osc, with the crystal taken out: a test current
between the crystal's terminals in the small-signal circuit (the same
matrices as every analysis) gives the impedance the circuit presents,
:math:`Z = R_{neg} + 1/(j\omega C_L)`: its real part is the negative
resistance and its reactance the load capacitance C_L.  Seen by the motional
arm (C₀ in parallel) the negative resistance must exceed R₁ for the
oscillation to start; the ratio |R_neg|/R₁ is the margin (at least 5× is a
common rule of practice, no source).

Very high Q: the loop search and the poles work at f_osc directly, and the
periodic steady state solves the orbit itself by shooting-Newton (the slow
envelope of a crystal — thousands of cycles — is one more direction of the
Newton step), so neither needs the settling run.  The startup time follows
from the small-signal growth rate σ of the dominant pole pair:
:math:`t = \ln(A_{ss}/A_0)/\sigma` from a start amplitude A₀
(``START_AMPLITUDE``) to the steady amplitude A_ss at the output.  The
time-domain run does settle it cycle by cycle: a crystal needs its
``--cycles`` raised to a few times Q_loaded/π.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

import numpy as np

from ringwise.analysis.checks import Finding
from ringwise.analysis.operating import Solved
from ringwise.analysis.periodic import SteadyState
from ringwise.analysis.pipeline import stamp_values, structure_of
from ringwise.analysis.poles import PoleFigures
from ringwise.circuit.mna import (
    assemble,
    assemble_batch,
    dot_last,
    linear_patterns,
    small_signal,
)
from ringwise.circuit.netlist import Netlist
from ringwise.circuit.topologies import CRYSTAL_C0, CRYSTAL_C1, build
from ringwise.units import format_si

#: Amplitude the startup time is counted from, V: a noise-level start
#: (common practice, no source).
START_AMPLITUDE: Final = 1e-6
#: Negative resistance over ESR at least this (common rule of practice, no source).
NEGATIVE_R_RULE: Final = 5.0
#: ppm and pF as factors.
PPM: Final = 1e6
PICO: Final = 1e-12


@dataclass(frozen=True)
class CrystalFigures:
    """The crystal's figures (SI; ppm as stated); ``None`` where they do not exist."""

    f_s: float
    f_p: float
    R1: float
    L1: float
    ppm_from_fs: float | None
    C_load: float | None
    f_load: float | None
    R_neg: float | None
    margin: float | None
    pulling_ppm_per_pF: float | None
    P_drive: float | None
    P_rating: float | None
    startup_time: float | None


def presented_impedance(solved: Solved, f: float) -> complex:
    """Impedance the circuit presents at the crystal's terminals at ``f`` (crystal out), Ω."""
    arm = solved.netlist["L"]
    c0 = solved.netlist[CRYSTAL_C0]
    rest = Netlist(
        tuple(el for el in solved.netlist if el.name not in ("L", CRYSTAL_C1, CRYSTAL_C0))
    )
    ss = small_signal(assemble(rest), solved.hybrid)
    lay = ss.layout
    rhs = lay.unit(arm.a) - lay.unit(c0.b)  # type: ignore[union-attr]
    Y = ss.G_full + 2j * math.pi * f * ss.C
    v = np.linalg.solve(Y, rhs.astype(complex))
    return complex(v @ rhs)


def crystal_figures(
    solved: Solved, steady: SteadyState | None, poles: PoleFigures
) -> CrystalFigures | None:
    """Frequency against f_s, load capacitance, negative resistance, pulling, drive, startup."""
    x = solved.design.crystal
    if x is None:
        return None
    L1, C1, C0 = x.L1, x.C_x1, x.C_x0
    f_s = 1.0 / (2.0 * math.pi * math.sqrt(L1 * C1))
    f_p = f_s * math.sqrt(1.0 + C1 / C0)
    f = solved.f_osc
    ppm = C_L = f_L = R_neg = margin = pulling = None
    if f is not None:
        ppm = (f / f_s - 1.0) * PPM
        w = 2.0 * math.pi * f
        Z = presented_impedance(solved, f)
        if Z.imag < 0:
            C_L = -1.0 / (w * Z.imag)
            f_L = f_s * (1.0 + C1 / (2.0 * (C0 + C_L)))
            pulling = -f_s * C1 / (2.0 * (C0 + C_L) ** 2) * PICO / f_s * PPM
        # seen by the motional arm: the circuit in parallel with C0
        Z_arm = 1.0 / (1.0 / Z + 1j * w * C0)
        R_neg = Z_arm.real
        margin = -R_neg / x.R_x1 if R_neg < 0 else 0.0
    P = steady.P_tank if steady is not None and steady.orbit is not None else None
    startup = None
    dom = poles.dominant
    if steady is not None and steady.amp_out and dom is not None and dom.sigma > 0:
        startup = math.log(steady.amp_out / START_AMPLITUDE) / dom.sigma
    return CrystalFigures(
        f_s=f_s, f_p=f_p, R1=x.R_x1, L1=L1, ppm_from_fs=ppm, C_load=C_L, f_load=f_L,
        R_neg=R_neg, margin=margin, pulling_ppm_per_pF=pulling, P_drive=P,
        P_rating=x.P_xmax, startup_time=startup,
    )  # fmt: skip


def crystal_checks(c: CrystalFigures | None) -> list[Finding]:
    """Warn when the negative-resistance margin is under the rule, or the drive over the rating."""
    if c is None:
        return []
    out = []
    if c.margin is not None and c.margin < NEGATIVE_R_RULE:
        out.append(
            Finding(
                "crystal-margin",
                f"the circuit shows the crystal {format_si(abs(c.R_neg or 0.0), 'Ω')} of negative "
                f"resistance, {c.margin:.2f}× its R₁ = {format_si(c.R1, 'Ω')} (a common rule asks "
                f"≥ {NEGATIVE_R_RULE:g}×): it may not start with a high-ESR part or when cold; "
                "raise g_m or lower C1 and C2",
            )
        )
    if c.P_drive is not None and c.P_rating is not None and c.P_drive > c.P_rating:
        out.append(
            Finding(
                "crystal-overdriven",
                f"the crystal dissipates {format_si(c.P_drive, 'W')} in R₁, above its rating "
                f"{format_si(c.P_rating, 'W')}: it ages faster and its frequency shifts; lower "
                "the loop gain (a smaller g_m, larger C1 and C2, or an emitter resistor)",
            )
        )
    return out


def _without_crystal(design) -> Netlist:
    """The design's netlist with the crystal taken out (motional arm and C₀)."""
    return Netlist(
        tuple(el for el in build(design) if el.name not in ("L", CRYSTAL_C1, CRYSTAL_C0))
    )


_REST: dict[tuple, tuple] = {}


def crystal_margins(design, values, sol) -> tuple[np.ndarray, np.ndarray]:
    """|R_neg|/R₁ and R_neg (Ω) of every member of a pipeline batch, each at its own f_osc.

    The same test current as :func:`presented_impedance`, for a whole batch:
    the circuit without the crystal is assembled from its unit stamps with
    the members' part values and linearised with their own hybrid-π
    elements (``sol.hybrid``).  NaN where a member has no zero-phase
    crossing; a margin of 0 where the circuit shows no negative resistance.
    """
    key = structure_of(design)
    if key not in _REST:
        rest = _without_crystal(design)
        _REST[key] = (linear_patterns(rest), rest)
    patterns, rest = _REST[key]
    B = len(sol.loop.f_osc)
    system = assemble_batch(patterns, stamp_values(patterns, values, B))
    ss = small_signal(system, sol.hybrid)
    lay = ss.layout
    full = build(design)
    arm, c0 = full["L"], full[CRYSTAL_C0]
    rhs = (lay.unit(arm.a) - lay.unit(c0.b)).astype(complex)  # type: ignore[union-attr]
    f = np.asarray(sol.loop.f_osc, dtype=float)
    w = 2.0 * np.pi * np.where(np.isfinite(f), f, 1.0)
    Y = ss.G_full + 1j * w[:, None, None] * ss.C
    v = np.linalg.solve(Y, np.broadcast_to(rhs, (B, lay.size))[..., None])[..., 0]
    Z = dot_last(v, rhs)
    C0 = np.asarray(values["C_x0"], dtype=float)
    Z_arm = 1.0 / (1.0 / Z + 1j * w * C0)
    R_neg = np.where(np.isfinite(f), Z_arm.real, np.nan)
    R1 = np.asarray(values["R_x1"], dtype=float)
    margin = np.where(R_neg < 0, -R_neg / R1, np.where(np.isfinite(R_neg), 0.0, np.nan))
    return margin, R_neg
