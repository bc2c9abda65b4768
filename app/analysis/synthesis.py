r"""Design from targets: a buildable component set for a frequency, supply and current.

The choices, each a rule of the trade (common practice, no source) and each
explained in the result:

* emitter degeneration: V_E of about a tenth of the supply (at least 1 V),
  RE = V_E/I_C, so β and V_BE drift move the current little;
* a stiff divider: ten times the base current through RB2;
* collector resistor (common-emitter, common-base) putting V_C midway
  between V_E and the supply, for the largest symmetric swing;
* tank: C_s = 1/((2πf)²L); if L is not given, a characteristic impedance
  √(L/C_s) that keeps the gain resistor at least ten times the reactance it
  loads, so the tank's Q is not swamped;
* the feedback ratio C1/C2 adjusted by the full model until the loop gain
  is the target;
* coupling and bypass capacitors with a reactance at f of at most a
  twentieth of what they couple, and no larger (long bias time constants
  invite squegging);
* every value snapped to a standard series (resistors E24, capacitors E12 or
  E24, the coil E12) and the ratio re-adjusted on the snapped values;
* the frequency the snapped values miss by is stated and, beyond
  ``FREQUENCY_MISS``, corrected by trimming one capacitor
  (:mod:`ringwise.analysis.trim`: C3 in the Clapp form, otherwise the smaller
  of C1 and C2) to one standard value or two in parallel — or the reason it
  cannot be;
* the Clapp form on request: C1 and C2 in series ``CLAPP_RATIO`` times C3, so
  C3 sets the frequency and the coil is larger for the same f;
* what the user set is kept: the load, the coil's Q and the transistor (class
  and values) are inputs here, never replaced;
* unbuildable parts are refused with the reason: a coil below
  ``MIN_INDUCTANCE``, a tank capacitor below ``MIN_OVER_JUNCTION`` times the
  transistor capacitance across it.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Final

from ringwise.analysis.criteria import VCE_HEADROOM
from ringwise.analysis.operating import solve
from ringwise.analysis.trim import MIN_OVER_JUNCTION, Trim, junction_across, trim_frequency
from ringwise.circuit.npn import T_NOMINAL, thermal_voltage
from ringwise.circuit.topologies import tank_factor
from ringwise.design import Design, Topology, with_param
from ringwise.errors import DesignError
from ringwise.preferred import nearest
from ringwise.presets import DEVICE_PRESETS
from ringwise.units import format_si

DEFAULT_GAIN: Final = 3.0
DEFAULT_Q_L: Final = 80.0
VE_FRACTION: Final = 0.1
VE_MIN: Final = 1.0
DIVIDER_STIFFNESS: Final = 10.0
#: Gain resistor over the reactance of the tank capacitor it loads.
LOAD_OVER_REACTANCE: Final = 10.0
#: Tank capacitors over the transistor's junction capacitances.
TANK_OVER_PARASITIC: Final = 20.0
#: Coupling and bypass reactance over what they couple.
COUPLING_RATIO: Final = 50.0
RATIO_ITERATIONS: Final = 12
#: When the loop gain falls short of the target by more than this fraction, the
#: tank impedance is raised along Z0_STEPS (more gain, more parasitic pull).
GAIN_SHORTFALL: Final = 0.1
Z0_STEPS: Final = (1.0, 1.6, 2.5, 4.0, 6.3)
#: Rounds of trimming the series capacitance for the target frequency.
FREQUENCY_TRIMS: Final = 4
#: The gain resistor is first sized for this multiple of the target hand gain,
#: leaving room for the losses the full model then counts.
LOSS_ALLOWANCE: Final = 2.0
RATIO_BOUNDS: Final = (0.05, 20.0)
#: Smallest coil proposed, H: below it a coil is a turn or two, no larger than
#: its leads and the board's traces (common practice, no source).
MIN_INDUCTANCE: Final = 50e-9
#: Clapp form: C1 and C2 in series are this many times C3 (common practice, no
#: source), so C3 is most of the frequency-setting capacitance.
CLAPP_RATIO: Final = 5.0
#: A frequency miss beyond this (relative) is corrected by a trim.
FREQUENCY_MISS: Final = 2e-3

#: Progress callback: fraction done in [0, 1]; returning False stops the search
#: for the tank impedance, keeping the best design found so far.
Progress = Callable[[float], bool | None]


class SynthesisError(DesignError):
    """Targets that cannot be met as asked."""


@dataclass(frozen=True)
class Synthesis:
    design: Design
    f_osc: float | None
    gain: float
    reasons: list[str]
    #: the target frequency, and f_osc's relative miss from it
    f_target: float = 0.0
    miss: float | None = None
    stopped: bool = False
    #: the capacitor trimmed for the frequency (None when none was)
    trim: Trim | None = None


def synthesize(
    topology: str,
    f: float,
    Vcc: float,
    IC: float,
    gain: float = DEFAULT_GAIN,
    L: float | None = None,
    ratio: float | None = None,
    preset: str = "general-purpose",
    Q_L: float | None = None,
    name: str | None = None,
    R_load: float | None = None,
    device: dict[str, Any] | None = None,
    clapp: bool = False,
    progress: Progress | None = None,
) -> Synthesis:
    """A full design meeting the targets, in standard values, with a reason per choice.

    ``Q_L``, ``R_load`` and the transistor (``device``: its fields as in a design,
    overriding the class ``preset``) are the user's and are kept as given; a
    ``Q_L`` of None is chosen (``DEFAULT_Q_L``, a typical coil).
    ``clapp`` asks for the Clapp form.  ``progress`` is called with the fraction
    done after each tank impedance tried; False stops the search there.
    """
    form = Topology(topology)
    if not (1e3 <= f <= 1e9 and 0.5 <= Vcc <= 1000 and 1e-6 <= IC <= 1.0 and gain > 1):
        raise SynthesisError(
            "targets out of range: f 1 kHz … 1 GHz, Vcc 0.5 … 1000 V, IC 1 µA … 1 A, gain > 1"
        )
    Q_chosen = Q_L is None
    Q_L = DEFAULT_Q_L if Q_L is None else Q_L
    if device is not None:
        preset = device.get("preset") or preset
    fields = ("beta", "IS", "VA", "fT", "C_mu")
    dev = {**DEVICE_PRESETS[preset], **{k: device[k] for k in fields if k in (device or {})}}
    preset_name = device.get("preset") if device is not None else preset
    w = 2.0 * math.pi * f
    VT = thermal_voltage(T_NOMINAL)
    reasons: list[str] = []
    VE = max(VE_MIN, VE_FRACTION * Vcc)
    VBE = VT * math.log(IC / dev["IS"])
    if Vcc < VE + VBE + VCE_HEADROOM:
        raise SynthesisError(f"Vcc = {Vcc:g} V leaves no headroom above V_E + V_BE")
    RE = nearest(VE / IC, "E24")
    reasons.append(
        f"RE = {format_si(RE, 'Ω')}: V_E ≈ {VE:.2g} V degenerates the bias so β and V_BE "
        "drift move I_C little"
    )
    IB = IC / dev["beta"]
    VB = VE + VBE
    I_div = DIVIDER_STIFFNESS * IB
    RB2 = nearest(VB / I_div, "E24")
    RB1 = nearest((Vcc - VB) / (I_div + IB), "E24")
    reasons.append(
        f"RB1 = {format_si(RB1, 'Ω')}, RB2 = {format_si(RB2, 'Ω')}: {DIVIDER_STIFFNESS:g}× the "
        f"base current in the divider holds V_B ≈ {VB:.3g} V against β spread"
    )
    RC = None
    n = ratio if ratio is not None else 0.5
    gm = IC / VT
    if form is not Topology.CC:
        VC = VE + 0.5 * (Vcc - VE)
        R_mid = (Vcc - VC) / IC
        # Hand figure of the loop gain per ohm of RC, with a factor for the losses
        # (the tank factor of ringwise.circuit.topologies.hand_formula, C1/C2 = n).
        per_ohm = gm * tank_factor(form, n, 1.0)
        R_need = LOSS_ALLOWANCE * gain / per_ohm
        RC = nearest(min(R_mid, R_need), "E24")
        why = (
            "V_C midway between V_E and the supply leaves the largest symmetric swing"
            if R_mid <= R_need
            else f"the hand-method gain g_m·RC·(ratio) with room for losses sets it "
            f"(V_C ≈ {Vcc - RC * IC:.3g} V, above midway)"
        )
        reasons.append(f"RC = {format_si(RC, 'Ω')}: {why}")
    R_gain = RC if RC is not None else RE
    L_given, n0 = L, n
    # In the Clapp form C1, C2 are CLAPP_RATIO·C3 in series: for the same loading
    # of C1 the tank's impedance, and so L, can be (1 + CLAPP_RATIO) times larger.
    clapp_spread = 1.0 + CLAPP_RATIO if clapp else 1.0

    def build_tank(z_scale: float):
        n = n0
        if L_given is None:
            # X_C1 = Z0/(1 + n) in a tank of characteristic impedance Z0 = √(L/Cs);
            # and the tank capacitors at least TANK_OVER_PARASITIC times the
            # transistor's own C_π + C_μ, so these do not set the frequency.
            C_par = gm / (2.0 * math.pi * dev["fT"]) + dev["C_mu"]
            Z0 = (
                z_scale
                * clapp_spread
                * min(
                    (1.0 + n) * R_gain / LOAD_OVER_REACTANCE,
                    (1.0 + n) / (TANK_OVER_PARASITIC * w * C_par),
                )
            )
            L = nearest(Z0 / w, "E12")
            why_L = (
                f"L = {format_si(L, 'H')}: a tank impedance that keeps the gain resistor "
                f"{LOAD_OVER_REACTANCE:g}× the reactance it loads and the tank capacitors "
                f"{TANK_OVER_PARASITIC:g}× the transistor's own"
            )
            if z_scale > 1:
                why_L += f", raised {z_scale:g}× so that the target loop gain can be reached"
        else:
            L = L_given
            why_L = f"L = {format_si(L, 'H')} as given"
        notes = [why_L]
        Cs = 1.0 / (w * w * L)
        R_in = min(dev["beta"] / gm, RB1 * RB2 / (RB1 + RB2))
        # Cc2 feeds the base (resistance R_in) or, in the common-base form, the
        # emitter, whose input resistance is about 1/g_m.
        Cc2 = nearest(COUPLING_RATIO * (gm if form is Topology.CB else 1.0 / R_in) / w, "E12")
        data = {
            "format": "ringwise.design",
            "version": 1,
            "name": name or f"{form.value} source, {format_si(f, 'Hz')}",
            "topology": form.value,
            "supply": {"Vcc": Vcc},
            "bias": {
                "RB1": RB1, "RB2": RB2, "RC": RC, "RE": RE,
                "CE": nearest(COUPLING_RATIO * gm / w, "E12") if form is Topology.CE else None,
                # the base bypass: its reactance, seen at the emitter divided by β + 1,
                # kept below 1/g_m
                "CB": nearest(gm / w, "E12") if form is Topology.CB else None,
            },
            "tank": {"L": L, "Q_L": Q_L, "C1": Cs * (1 + n), "C2": Cs * (1 + n) / n,
                     "C3": Cs if clapp else None},
            "coupling": {"Cc1": Cs * (1 + n) * COUPLING_RATIO, "Cc2": Cc2},
            "load": {"R_load": R_load},
            "device": {"preset": preset_name, **dev},
        }  # fmt: skip
        design = _with_tank(Design.model_validate(data), Cs, n)
        design = with_param(design, "Cc1", nearest(design.tank.C1 * COUPLING_RATIO, "E12"))
        notes.append(
            f"Cc1, Cc2{', CE' if form is Topology.CE else ', CB' if form is Topology.CB else ''}: "
            f"reactance at f at most 1/{COUPLING_RATIO:g} of what each couples, and no larger"
        )
        # The transistor's own capacitances and the loading pull the frequency: trim
        # the tank's series capacitance until the full model oscillates at f.
        for _ in range(FREQUENCY_TRIMS):
            n = _ratio_for_gain(design, Cs, n, gain, fixed=ratio is not None)
            s_now = solve(_with_tank(design, Cs, n))
            if s_now.f_osc is None or abs(s_now.f_osc / f - 1.0) < 1e-4:
                break
            Cs *= (s_now.f_osc / f) ** 2
        design, n, achieved = _tune_ratio(design, Cs, n, gain, f)
        notes.append(
            f"C1 = {format_si(design.tank.C1, 'F')}, C2 = {format_si(design.tank.C2, 'F')}: "
            f"C1/C2 = {design.tank.C1 / design.tank.C2:.3g} gives a loop gain of {achieved:.3g} "
            f"(target {gain:g}) with every loss included, in E24 values"
        )
        if design.tank.C3 is not None:
            notes.append(
                f"C3 = {format_si(design.tank.C3, 'F')}: the Clapp capacitor; C1 and C2 in "
                f"series are some {CLAPP_RATIO:g}× it, so C3 sets the frequency and the "
                "transistor's capacitances across C1, C2 matter less"
            )
        return design, achieved, notes

    steps = Z0_STEPS if L_given is None else (1.0,)
    stopped = False
    for i, z_scale in enumerate(steps):
        design, achieved, notes = build_tank(z_scale)
        if achieved >= (1.0 - GAIN_SHORTFALL) * gain:
            break
        if progress is not None and progress((i + 1) / len(steps)) is False:
            stopped = i + 1 < len(steps)
            notes.append(
                f"stopped after {i + 1} of {len(steps)} tank impedances: the loop gain "
                f"{achieved:.3g} falls short of the target {gain:g}"
            )
            break
    reasons += notes
    reasons += _kept(Q_L, Q_chosen, R_load, preset_name, device is not None)
    design, miss_notes, trim = _meet_frequency(design, f)
    reasons += miss_notes
    _refuse_unbuildable(design, L_given is None)
    s = solve(design)
    miss = s.f_osc / f - 1.0 if s.f_osc is not None else None
    if progress is not None:
        progress(1.0)
    return Synthesis(design, s.f_osc, s.gain, reasons, f, miss, stopped, trim)


def _kept(
    Q_L: float, Q_chosen: bool, R_load: float | None, preset: str | None, own_device: bool
) -> list[str]:
    """The reasons line for what the user set and the synthesis kept."""
    load = f"the load R_load = {format_si(R_load, 'Ω')}" if R_load is not None else "no load"
    device = (
        "the transistor's values as set"
        if own_device
        else f"the {preset} transistor class (typical values, from memory)"
    )
    coil = f"Q_L = {Q_L:.4g}" + (" (chosen: a typical coil)" if Q_chosen else "")
    return [f"Kept as set: {coil}, {load}, {device}; every figure includes them"]


def _meet_frequency(design: Design, f: float) -> tuple[Design, list[str], Trim | None]:
    """State the standard values' frequency miss; beyond FREQUENCY_MISS, trim one
    capacitor for it (or say why it cannot be)."""
    s = solve(design)
    if s.f_osc is None:
        return design, ["the standard values leave the loop without an oscillation frequency"], None
    miss = s.f_osc / f - 1.0
    notes = [
        f"In standard values f_osc = {format_si(s.f_osc, 'Hz')}, {100 * miss:+.2f} % from "
        f"the target {format_si(f, 'Hz')}"
    ]
    if abs(miss) <= FREQUENCY_MISS:
        return design, notes, None
    t = trim_frequency(design, f, "E24")
    if t.reason is not None:
        return design, [*notes, f"{t.text}; the design keeps the standard values"], None
    return t.design, [*notes, t.text], t


def _refuse_unbuildable(design: Design, coil_chosen: bool) -> None:
    """Refuse a coil below MIN_INDUCTANCE and a tank capacitor below MIN_OVER_JUNCTION
    times the transistor's capacitance across it, with the reason and the remedy."""
    t = design.tank
    if coil_chosen and t.L < MIN_INDUCTANCE:
        raise SynthesisError(
            f"the coil would be {format_si(t.L, 'H')}, below {format_si(MIN_INDUCTANCE, 'H')} "
            "(a turn or two, no larger than its leads and the board's traces): use the Clapp "
            "form (a larger coil for the same frequency), a lower I_C, or give L"
        )
    s = solve(design)
    for part in ("C1", "C2"):
        C = getattr(t, part)
        junction = junction_across(s, part)
        if junction > 0 and MIN_OVER_JUNCTION * junction > C:
            raise SynthesisError(
                f"{part} would be {format_si(C, 'F')}, below {MIN_OVER_JUNCTION:g}× the "
                f"transistor's {format_si(junction, 'F')} across it: the transistor, not the "
                "tank, would set the frequency; use the Clapp form, a lower I_C, or a "
                "transistor class of higher f_T"
            )


def _with_tank(design: Design, Cs: float, k: float, snap: bool = False) -> Design:
    """``design`` with C1/C2 = k at series capacitance Cs (optionally in E24 values).

    In the Clapp form C3 = Cs·(1 + 1/CLAPP_RATIO) and C1, C2 in series are
    CLAPP_RATIO·C3, so the three in series are Cs.
    """
    C12 = Cs
    parts = {}
    if design.tank.C3 is not None:
        C3 = Cs * (1.0 + 1.0 / CLAPP_RATIO)
        C12 = CLAPP_RATIO * C3
        parts["C3"] = nearest(C3, "E24") if snap else C3
    C1, C2 = C12 * (1 + k), C12 * (1 + k) / k
    if snap:
        C1, C2 = nearest(C1, "E24"), nearest(C2, "E24")
    parts.update(C1=C1, C2=C2)
    for part, value in parts.items():
        design = with_param(design, part, value)
    return design


def _ratio_for_gain(design: Design, Cs: float, n: float, target: float, fixed: bool) -> float:
    """C1/C2 (at constant Cs) for which the full loop gain is the target."""
    if fixed:
        return n
    common_base = design.topology is Topology.CB
    for _ in range(RATIO_ITERATIONS):
        g = solve(_with_tank(design, Cs, n)).gain
        if g <= 0:
            n = min(n * 2.0, 1.0 if common_base else RATIO_BOUNDS[1])
            continue
        step = target / g
        if common_base:
            # the gain goes as k = n/(1+n)², largest (1/4) at n = 1: tune k, keep n ≤ 1
            k = min(n / (1 + n) ** 2 * step, 0.25)
            n_new = 1.0 if k >= 0.25 else ((1 - 2 * k) - math.sqrt(1 - 4 * k)) / (2 * k)
        else:
            n_new = n * step
        n = min(max(n_new, RATIO_BOUNDS[0]), RATIO_BOUNDS[1])
        if abs(step - 1.0) < 1e-3:
            break
    return n


def _tune_ratio(
    design: Design, Cs: float, n: float, target: float, f_target: float
) -> tuple[Design, float, float]:
    """The E24 pair of C1, C2 next to (Cs, n) closest to the target gain and frequency."""
    start = _with_tank(design, Cs, n, snap=True)
    best, best_score = start, math.inf
    for dC1 in (-1, 0, 1):
        for dC2 in (-1, 0, 1):
            cand = _step(_step(start, "C1", dC1), "C2", dC2)
            s = solve(cand)
            if s.f_osc is None or s.gain <= 0:
                continue
            score = abs(math.log(s.gain / target)) + 4.0 * abs(math.log(s.f_osc / f_target))
            if score < best_score:
                best, best_score = cand, score
    return best, n, solve(best).gain


def _step(design: Design, part: str, k: int) -> Design:
    """Move ``part`` ``k`` steps along the E24 series."""
    from ringwise.preferred import values

    v = getattr(design.tank, part)
    decade = 10.0 ** math.floor(math.log10(v) - 1)
    grid = [x * decade * m for m in (0.1, 1.0, 10.0) for x in values("E24")]
    grid.sort()
    i = min(range(len(grid)), key=lambda j: abs(math.log(grid[j] / v)))
    return with_param(design, part, grid[max(0, min(len(grid) - 1, i + k))])
