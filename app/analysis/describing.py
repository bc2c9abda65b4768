r"""Steady amplitude by the describing function, with the bias shift solved self-consistently.

With a sinusoidal base-emitter drive :math:`v_{be} = V_{BE,avg} + x V_T\cos\theta`
the exponential junction's current is
:math:`I_S e^{V_{BE,avg}/V_T} e^{x\cos\theta}`, whose average is
:math:`I_S e^{V_{BE,avg}/V_T} I_0(x)` and whose fundamental is
:math:`2 I_S e^{V_{BE,avg}/V_T} I_1(x)`.  Two consequences:

* The **average** currents obey the DC network with the saturation current
  replaced by :math:`I_S I_0(x)`: the emitter (and its bypass capacitor)
  settles to a new average, usually a lower V_BE,avg.  That is an ordinary
  DC solve of the same netlist with one device parameter changed.
* The **fundamental** transconductance is
  :math:`G_m = g_{m,avg}\cdot 2 I_1(x)/(x I_0(x))`, with
  :math:`g_{m,avg} = I_{C,avg}/V_T` at the shifted average point.

The amplitude is the drive x at which the circuit linearised at the shifted
average point, with :math:`g_m` and :math:`g_\pi` scaled by
:math:`2I_1/(xI_0)`, has a loop gain of exactly one at its zero-phase
frequency — its dominant pole pair on the jω axis.  Holding the average
current at its DC value instead (the fixed-bias shortcut) under-estimates
the amplitude noticeably at loop gains of a few.

References
----------
Clarke & Hess, *Communication Circuits: Analysis and Design*, 1971;
Gray, Hurst, Lewis & Meyer, *Analysis and Design of Analog Integrated
Circuits*, large-signal transconductance of the bipolar pair/oscillators
(both from memory).  Bessel functions: ``scipy.special.i0e``/``i1e``.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Final

import numpy as np
from scipy.optimize import brentq
from scipy.special import i0e

from ringwise.analysis.criteria import VCE_HEADROOM, Region
from ringwise.analysis.dc import DCConvergenceError, operating_point, solve_dc
from ringwise.analysis.loop import find_oscillation
from ringwise.analysis.operating import Solved
from ringwise.analysis.startup import fixed_bias_drive, gm_ratio
from ringwise.circuit.mna import LinearSystem, small_signal
from ringwise.circuit.netlist import NPN
from ringwise.circuit.npn import hybrid_pi
from ringwise.circuit.topologies import T1

#: Beyond this drive the junction conducts in short pulses only; the
#: sinusoidal-drive assumption is poor, V/V_T.
X_PULSED: Final = 40.0
#: Largest drive searched, V/V_T (about 3 V of base-emitter drive: beyond it the
#: junction would be driven into reverse breakdown on the negative peaks).
X_MAX: Final = 120.0
#: ln I0(x) beyond which the averaged junction is outside floating-point range.
LOG_I0_MAX: Final = 600.0
#: Secant on the drive: second trial factor, step limit (in ln x), tolerance
#: on ln(gain) and iteration cap.
SECANT_FIRST: Final = 1.2
SECANT_MAX_STEP: Final = math.log(4.0)
DRIVE_LOG_TOL: Final = 1e-7
SECANT_STEPS: Final = 20


def _log_i0(x: float) -> float:
    """ln I0(x), overflow-free (I0 = i0e·e^x)."""
    return math.log(i0e(x)) + x


@dataclass(frozen=True)
class LargeSignal:
    """Describing-function steady state (SI units).

    Attributes
    ----------
    x : base-emitter fundamental amplitude over V_T
    amp_be : base-emitter fundamental amplitude, V
    amp_out : fundamental amplitude at the output tank node t1, V
    amp_ce : collector-emitter fundamental amplitude, V
    IC_avg : average collector current with the drive applied, A
    VBE_avg : average base-emitter voltage with the drive applied, V
    f : oscillation frequency at that amplitude, Hz
    P_tank : signal power dissipated in the coil's loss resistance, W
    x_fixed_bias : the drive the fixed-bias shortcut would give
    valid : whether the estimate's assumptions hold
    reason : why not, when not
    """

    x: float | None
    amp_be: float | None
    amp_out: float | None
    amp_ce: float | None
    IC_avg: float | None
    VBE_avg: float | None
    f: float | None
    P_tank: float | None
    x_fixed_bias: float | None
    valid: bool
    reason: str | None
    #: Fundamental phasors of every unknown (node voltages, branch currents), V or A.
    phasors: np.ndarray | None = None
    #: Average state (node voltages, branch currents) with the drive applied.
    x_avg: np.ndarray | None = None


def _with_IS(system: LinearSystem, factor: float) -> LinearSystem:
    dev = system.devices[0]
    params = dataclasses.replace(dev.params, IS=dev.params.IS * factor)
    return dataclasses.replace(system, devices=(NPN(dev.name, dev.c, dev.b, dev.e, params),))


@dataclass
class _Drive:
    """Evaluations of the loop at drive x, with warm starts between them."""

    solved: Solved
    x_dc: np.ndarray
    f_last: float

    def evaluate(self, x: float):
        s = self.solved
        log_factor = _log_i0(x)
        if log_factor > LOG_I0_MAX:
            raise DCConvergenceError(f"drive {x:.3g} V_T is beyond the model's range")
        system = _with_IS(s.system, math.exp(log_factor))
        xdc = solve_dc(system, self.x_dc)
        op = operating_point(system, xdc)
        hp = hybrid_pi(op.state, s.design.device.fT, s.design.device.C_mu)
        k = gm_ratio(x)
        hp_fund = dataclasses.replace(hp, gm=hp.gm * k, g_pi=hp.g_pi * k)
        ss = small_signal(system, hp_fund)
        loop = find_oscillation(ss, s.tank.f_ideal, self.f_last)
        self.x_dc = xdc
        if np.isfinite(loop.f_osc):
            self.f_last = float(loop.f_osc)
        return op, ss, loop

    def log_gain(self, x: float) -> float:
        try:
            _op, _ss, loop = self.evaluate(x)
        except DCConvergenceError:
            return -math.inf
        g = float(loop.gain)
        return math.log(g) if np.isfinite(g) and g > 0 else -math.inf


def describing_function(solved: Solved) -> LargeSignal:
    """Self-consistent describing-function amplitude of a solved design."""
    gain = solved.gain if solved.f_osc is not None else 0.0
    x_fixed = fixed_bias_drive(gain) if gain > 1.0 else None
    if solved.op.region is not Region.ACTIVE or x_fixed is None:
        return LargeSignal(
            None, None, None, None, None, None, None, None, x_fixed, False,
            "no steady oscillation: the loop gain is below 1 or the transistor is not active",
        )  # fmt: skip
    drive = _Drive(solved, solved.op.x, float(solved.f_osc))
    x = _secant_drive(drive, x_fixed)
    if x is None:
        x = _bracketed_drive(drive, x_fixed)
    if isinstance(x, str):
        return LargeSignal(
            None, None, None, None, None, None, None, None, x_fixed, False, x
        )  # fmt: skip
    op, ss, loop = drive.evaluate(x)
    return _figures(solved, x, x_fixed, op, ss, loop)


def _secant_drive(drive: _Drive, x_fixed: float) -> float | None:
    """Secant on ln(gain) against ln(x) from the fixed-bias drive (usually 3-5 solves)."""
    a, b = math.log(x_fixed), math.log(x_fixed * SECANT_FIRST)
    ga, gb = drive.log_gain(math.exp(a)), drive.log_gain(math.exp(b))
    for _ in range(SECANT_STEPS):
        if not (math.isfinite(ga) and math.isfinite(gb)) or ga == gb:
            return None
        c = b - gb * (b - a) / (gb - ga)
        c = min(max(c, b - SECANT_MAX_STEP), b + SECANT_MAX_STEP)
        gc = drive.log_gain(math.exp(c))
        if math.isfinite(gc) and abs(gc) < DRIVE_LOG_TOL:
            return math.exp(c)
        a, ga, b, gb = b, gb, c, gc
    return None


def _bracketed_drive(drive: _Drive, x_fixed: float) -> float | str:
    """Brent's method between a drive that still grows and one that decays."""
    lo, hi = 1e-6, max(2.0 * x_fixed, 1.0)
    while drive.log_gain(hi) > 0.0 and hi < X_MAX:
        hi *= 2.0
    if drive.log_gain(hi) > 0.0:
        return f"the loop gain stays above 1 up to a drive of {X_MAX:g} V_T"
    if not drive.log_gain(lo) > 0.0:
        return "the loop gain falls below 1 as soon as any drive is applied"
    return brentq(drive.log_gain, lo, hi, xtol=1e-9, rtol=1e-9)


def _figures(solved: Solved, x: float, x_fixed: float, op, ss, loop) -> LargeSignal:
    VT = solved.VT
    lay = ss.layout
    f = float(loop.f_osc)
    s = 2j * math.pi * f
    sol = np.linalg.solve(ss.G + s * ss.C, ss.u.astype(complex))
    v_be_unit = abs(sol @ ss.w)
    amp_be = x * VT
    scale = amp_be / v_be_unit  # test-current amplitude that gives this drive
    amp_out = abs(sol[lay.node[T1]]) * scale
    amp_ce = abs(sol @ ss.u) * scale
    I_L = abs(sol[lay.branch["L"]]) * scale
    P_tank = 0.5 * I_L**2 * solved.tank.R_s
    valid, reason = True, None
    if op.VCE - amp_ce < VCE_HEADROOM:
        valid = False
        reason = (
            f"the collector-emitter swing ({amp_ce:.3g} V on an average {op.VCE:.3g} V) "
            "runs into saturation; run the transient for the real amplitude"
        )
    elif x > X_PULSED:
        valid = False
        reason = (
            f"the drive ({x:.3g} V_T) keeps the transistor cut off for most of the cycle; "
            "run the transient for the real amplitude"
        )
    return LargeSignal(
        x=x,
        amp_be=amp_be,
        amp_out=amp_out,
        amp_ce=amp_ce,
        IC_avg=op.IC,
        VBE_avg=op.VBE,
        f=f,
        P_tank=P_tank,
        x_fixed_bias=x_fixed,
        valid=valid,
        reason=reason,
        phasors=sol * scale,
        x_avg=op.x,
    )
