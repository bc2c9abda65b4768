"""The result contract: what ``ringwise analyze`` prints and ``POST /api/analyze`` returns.

SI base units throughout.  Every number is finite or ``null``: a quantity that
does not exist (no oscillation frequency, an infinite r_o) is ``null`` and the
warnings say why.
"""

from __future__ import annotations

import math
from typing import Annotated, Any, Literal, TypeVar

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field


def _finite_or_none(value: Any) -> Any:
    if value is None:
        return None
    number = float(value)
    return number if math.isfinite(number) else None


#: A float that is ``null`` in JSON whenever it is not finite.
Num = Annotated[float | None, BeforeValidator(_finite_or_none)]


class _Out(BaseModel):
    model_config = ConfigDict(extra="forbid")

    def _repr_html_(self) -> str:
        """A notebook shows a result as a table (:mod:`ringwise.notebook`)."""
        from ringwise.notebook import html_table

        return html_table(self)


M = TypeVar("M", bound=BaseModel)


def from_attributes(model: type[M], source: object, **given: Any) -> M:
    """The one conversion of an analysis object into the model the API serves:
    every field from the attribute of the same name, except those ``given``."""
    return model.model_validate(
        {
            name: given[name] if name in given else getattr(source, name)
            for name in model.model_fields
        }
    )


class OperatingPointOut(_Out):
    VB: Num = Field(description="Base voltage, V")
    VE: Num = Field(description="Emitter voltage, V")
    VC: Num = Field(description="Collector voltage, V")
    IC: Num = Field(description="Collector current, A")
    IB: Num = Field(description="Base current, A")
    VCE: Num = Field(description="Collector-emitter voltage, V")
    VBE: Num = Field(description="Base-emitter voltage, V (computed, never assumed)")
    P_device: Num = Field(description="Transistor dissipation, W")
    I_divider: Num = Field(description="Current in the lower divider resistor RB2, A")
    region: Literal["active", "saturation", "cut-off"]


class SmallSignalOut(_Out):
    gm: Num = Field(description="Transconductance, S")
    r_pi: Num = Field(description="Base input resistance, Ω")
    r_o: Num = Field(description="Output resistance, Ω (null when infinite)")
    C_pi: Num = Field(description="Base-emitter capacitance, F")
    C_mu: Num = Field(description="Base-collector capacitance, F")


class TankOut(_Out):
    C_series: Num = Field(description="Series combination of C1, C2 (and C3), F")
    f_ideal: Num = Field(description="1/(2π√(L·C_series)), Hz")
    feedback_ratio: Num = Field(description="C1/C2 = |v_be / v_ce| of the ideal tank")
    R_s: Num = Field(description="Inductor series loss ω0·L/Q_L, Ω")
    output_node: str = Field(description="Where the output and the load are taken")


class BudgetLineOut(_Out):
    element: str
    label: str
    gain_without: Num = Field(description="Loop gain with this element made ideal")
    f_without: Num = Field(description="Oscillation frequency with this element made ideal, Hz")
    cost_dB: Num = Field(description="20·log10(gain_without / gain), dB")
    share: Num = Field(
        description="Fraction of the total positive cost of the losses (null for the gain setter)"
    )
    in_hand: bool = Field(
        description="Part of the hand formula (the gain-setting resistor): not a loss"
    )


class LossOut(_Out):
    element: str = Field(description="Budget element, or 'rest' for the losses' interplay")
    label: str
    cost_dB: Num = Field(description="Loop gain it costs, dB")
    fraction: Num = Field(description="Fraction of the loop gain it takes, 1 − 10^(−cost/20)")
    share: Num = Field(description="Its cost over the hand-to-full gap (null without a gap)")
    text: str = Field(description="What its bar says, e.g. '1.07 dB · 11.6 %'")


class GainStoryOut(_Out):
    formula: str = Field(description="The form's hand formula in symbols")
    numbers: str = Field(description="The hand formula with this design's values, and its result")
    hand: Num = Field(description="Hand-method loop gain")
    full: Num = Field(description="Full-circuit loop gain")
    gap_dB: Num = Field(description="20·log10(hand/full), dB")
    losses: list[LossOut] = Field(
        description="What the hand method ignores, largest first; the costs sum to gap_dB"
    )


class LoopOut(_Out):
    f_osc: Num = Field(description="Zero-phase frequency of the return ratio, Hz")
    gain: Num = Field(description="|T(f_osc)|: loop gain with all loading")
    gain_ideal: Num = Field(description="Hand-method loop gain (lossless, gain resistor only)")
    phase_slope: Num = Field(description="dφ/dω of T at f_osc, s")
    Q_loaded: Num = Field(description="(ω/2)·|dφ/dω|")
    Z_out: Num = Field(description="|v_ce/i_t| at f_osc: load seen by the controlled source, Ω")
    budget: list[BudgetLineOut]
    story: GainStoryOut | None = Field(
        description="From the hand formula to the full loop gain (null without f_osc)"
    )


class PoleOut(_Out):
    sigma: Num = Field(description="Real part, 1/s (positive grows)")
    f: Num = Field(description="Imaginary part / 2π, Hz")


class PolesOut(_Out):
    sigma: Num = Field(description="Real part of the dominant pair, 1/s")
    f: Num = Field(description="Frequency of the dominant pair, Hz")
    growth_time: Num = Field(description="1/σ when σ > 0: envelope time constant, s")
    other_rhp: list[PoleOut]


class StartupOut(_Out):
    verdict: Literal["will-start", "marginal", "will-not-start", "overdriven"]
    label: str
    margin: Num = Field(description="Loop gain over the threshold of 1 (a factor)")
    margin_dB: Num = Field(description="20·log10(margin), dB")
    threshold_param: str = Field(description="Part the threshold was searched on")
    threshold_value: Num = Field(description="Its value at loop gain 1")
    threshold_RC: Num = Field(description="Collector resistor at loop gain 1 (null without RC)")


class WarningOut(_Out):
    code: str
    message: str


class MultiplierOut(_Out):
    re: Num = Field(description="Real part of a Floquet multiplier")
    im: Num = Field(description="Imaginary part of a Floquet multiplier")


class PeriodOut(_Out):
    t: list[Num] = Field(description="Time over one period, s")
    v_out: list[Num] = Field(description="Output tank node voltage, V")
    v_be: list[Num] = Field(description="Base-emitter voltage, V")
    v_ce: list[Num] = Field(description="Collector-emitter voltage, V")
    i_L: list[Num] = Field(description="Coil current, A")


class SteadyStateOut(_Out):
    behaviour: Literal["settles", "squegs", "period-doubling", "unstable", "no-orbit"] = Field(
        description="What the Floquet multipliers of the periodic orbit say it does"
    )
    reason: str | None = Field(description="Why there is no orbit, when there is none")
    f: Num = Field(description="Oscillation frequency of the periodic steady state, Hz")
    amp_out: Num = Field(description="Fundamental amplitude at the output tank node, V")
    amp_be: Num = Field(description="Base-emitter fundamental amplitude, V")
    amp_ce: Num = Field(description="Collector-emitter fundamental amplitude, V")
    thd: Num = Field(description="Total harmonic distortion at the output node (ratio)")
    harmonics_dBc: list[Num] = Field(description="2nd … 7th harmonic at the output node, dBc")
    IC_avg: Num = Field(description="Average collector current over the period, A")
    VE_avg: Num = Field(description="Average emitter voltage over the period, V")
    VE_shift: Num = Field(description="Average emitter voltage minus its DC value, V")
    VCE_min: Num = Field(description="Lowest collector-emitter voltage over the period, V")
    P_tank: Num = Field(description="Power dissipated in the coil's loss, W")
    P_load: Num = Field(description="Power delivered to the load resistor, W")
    P_in: Num = Field(description="DC input power from the supply, W")
    efficiency: Num = Field(description="(coil loss + load power) / DC input power")
    multipliers: list[MultiplierOut] = Field(
        description="Non-trivial Floquet multipliers, largest magnitude first"
    )
    trivial_multiplier: MultiplierOut | None = Field(
        description="The multiplier along the orbit (1 to round-off)"
    )
    settle_cycles: Num = Field(
        description="Periods for a deviation to fall to 1 % (from the largest multiplier)"
    )
    steps: int = Field(description="Equal time steps per period of the orbit")
    output_node: str
    period: PeriodOut


class VerdictOut(_Out):
    code: Literal[
        "settles-cleanly",
        "settles-with-warnings",
        "saturates",
        "marginal",
        "squegs",
        "period-doubles",
        "unstable",
        "unresolved",
        "wont-start",
        "pending",
    ] = Field(description="Start and large-signal health in one word")
    label: str = Field(description="The verdict in words")
    icon: Literal["ok", "caution", "stop", "pending"] = Field(
        description="The symbol the sheet shows beside the words"
    )


class NoisePointOut(_Out):
    offset: Num = Field(description="Offset from the carrier, Hz")
    dBc_Hz: Num = Field(description="Single-sideband phase noise, dBc/Hz")


class NoiseCurveOut(_Out):
    offset: list[float] = Field(description="Offsets 10 Hz … 10 MHz, Hz")
    dBc_Hz: list[float] = Field(description="SSB phase noise, dBc/Hz")


class NoiseSourceOut(_Out):
    name: str = Field(description="The source: its part and its kind, e.g. 'RB1 thermal'")
    part: str = Field(description="The part it belongs to")
    kind: Literal["thermal", "collector shot", "base shot", "base flicker", "supply"]
    diffusion: Num = Field(description="Its part of the phase diffusion constant, s (white)")
    share_1k: Num = Field(description="Its share of the phase noise at 1 kHz offset (0 … 1)")
    share_100k: Num = Field(description="Its share of the phase noise at 100 kHz offset (0 … 1)")


class PartStressOut(_Out):
    part: str
    I_rms: Num = Field(description="RMS signal current, A")
    V_peak: Num = Field(description="Peak voltage across it, DC plus signal, V")
    P: Num = Field(description="Average dissipated power, W")


class StabilityOut(_Out):
    Q_loaded: Num = Field(description="Loaded Q from the loop's phase slope")
    P_signal: Num = Field(description="Signal power dissipated in the resonator loss, W")
    F_dB: Num = Field(description="Device noise factor used, dB")
    f_corner: Num = Field(description="Flicker corner used, Hz")
    leeson_corner: Num = Field(description="f0/(2·Q_loaded): edge of the 1/f² region, Hz")
    phase_noise: list[NoisePointOut]
    curve: NoiseCurveOut
    pushing_Hz_per_V: Num = Field(description="df_osc/dVcc, Hz/V")
    pulling_Hz: Num = Field(description="f_osc with the load minus f_osc open, Hz")
    pulling_Hz_per_ohm: Num = Field(description="df_osc/dR_load at the load, Hz/Ω")
    parts: list[PartStressOut]
    method: str | None = Field(
        default=None, description="How the computed phase noise was found, in one line"
    )
    diffusion: Num = Field(
        default=None,
        description="Phase diffusion constant c: var of the time shift grows as c·t, s",
    )
    F_effective_dB: Num = Field(
        default=None,
        description="Noise factor Leeson's formula needs to give the computed 1/f² level, dB",
    )
    flicker_corner: Num = Field(
        default=None, description="Offset below which flicker up-conversion dominates (1/f³), Hz"
    )
    spectrum: list[NoisePointOut] = Field(
        default_factory=list,
        description="Computed phase noise at the report offsets (from the noise sources)",
    )
    spectrum_curve: NoiseCurveOut | None = Field(
        default=None, description="Computed phase noise, 10 Hz … 10 MHz (Lorentzian at the carrier)"
    )
    sources: list[NoiseSourceOut] = Field(
        default_factory=list, description="Every noise source and its share, largest first"
    )


class OutputOut(_Out):
    """What the oscillator delivers into its load (from the periodic steady state)."""

    R_load: Num = Field(description="Load resistance at the output node, Ω")
    C_load: Num = Field(description="Load capacitance across it, F (null: none)")
    V_rms: Num = Field(description="RMS voltage across the load, V (null: no steady orbit)")
    V_peak: Num = Field(description="Largest |v| across the load, V")
    P: Num = Field(description="Power delivered into R_load, V_rms²/R_load, W")
    P_dBm: Num = Field(description="Power delivered into R_load, dBm (re 1 mW)")
    harmonics_dBc: list[Num] = Field(description="2nd, 3rd … harmonics at the load, dBc")
    change: Num = Field(description="Stated load change for the pulling figure, fraction")
    pull_ppm: Num = Field(
        description="f_osc with R_load·(1 − change), C_load·(1 + change) against as entered, ppm"
    )


class CrystalOut(_Out):
    """A crystal in place of the coil: its figures against the circuit's."""

    f_s: Num = Field(description="Series resonance 1/(2π√(L₁C₁)), Hz")
    f_p: Num = Field(description="Parallel resonance f_s·√(1 + C₁/C₀), Hz")
    R1: Num = Field(description="Motional resistance R₁ (ESR), Ω")
    L1: Num = Field(description="Motional inductance L₁, H")
    ppm_from_fs: Num = Field(description="f_osc against f_s, ppm")
    C_load: Num = Field(description="Load capacitance the circuit presents at f_osc, F")
    f_load: Num = Field(description="f_s·(1 + C₁/(2(C₀ + C_L))) at that load, Hz")
    R_neg: Num = Field(description="Negative resistance the circuit shows the motional arm, Ω")
    margin: Num = Field(description="|R_neg| / R₁ (≥ 5 common practice)")
    pulling_ppm_per_pF: Num = Field(description="df/dC_L, ppm per pF of load capacitance")
    P_drive: Num = Field(description="Drive level: power in R₁ from the steady state, W")
    P_rating: Num = Field(description="Drive-level rating entered, W")
    startup_time: Num = Field(description="ln(A_ss/1 µV)/σ from the growth rate, s")


class TuningPointOut(_Out):
    """The steady state at one tuning voltage, and the diode's swing against its bias."""

    V_tune: Num = Field(description="Tuning voltage (the diode's reverse bias), V")
    f_osc: Num = Field(description="Small-signal oscillation frequency, Hz")
    gain: Num = Field(description="Loop gain |T(f_osc)|")
    starts: bool
    behaviour: str = Field(description="Steady-state behaviour (settles, squegs, …, no-orbit)")
    f_steady: Num = Field(description="Frequency at full amplitude, Hz")
    amp_out: Num = Field(description="Fundamental amplitude at the output node, V")
    V_diode_min: Num = Field(description="Lowest reverse voltage of the junction on the orbit, V")
    V_diode_max: Num = Field(description="Highest reverse voltage of the junction on the orbit, V")
    V_rf_peak: Num = Field(description="Largest excursion of the junction voltage from the bias, V")
    forward_biased: bool | None = Field(
        description="The RF swing drives the junction forward (its reverse voltage below 0)"
    )


class TuningOut(_Out):
    """A varactor-tuned tank across its tuning range (lists run over ``V``)."""

    V_tune: Num = Field(description="The design's own tuning voltage, V")
    V: list[float] = Field(description="Tuning voltages, V")
    f_osc: list[float | None] = Field(description="f_osc at each, Hz (null: no crossing)")
    K: list[float | None] = Field(description="Tuning gain df_osc/dV at each, Hz/V")
    gain: list[float] = Field(description="Loop gain at each")
    starts: list[bool]
    C_branch: list[float] = Field(description="Varactor branch (C_v in series with C(V)), F")
    f_low: Num = Field(description="Lowest f_osc of the range, Hz")
    f_high: Num = Field(description="Highest f_osc of the range, Hz")
    tuning_ratio: Num = Field(description="f_high / f_low")
    K_at_min: Num = Field(description="Tuning gain at V_min, Hz/V")
    K_at_max: Num = Field(description="Tuning gain at V_max, Hz/V")
    K_ratio: Num = Field(description="K(V_min)/K(V_max): how unevenly the range is spread")
    starts_everywhere: bool = Field(description="It starts at every tuning voltage")
    min_gain: Num = Field(description="Lowest loop gain across the range")
    points: list[TuningPointOut] = Field(
        description="Steady state at V_min, the middle and V_max (empty on the first answer)"
    )
    forward_biased: bool | None = Field(
        description="The RF swing forward-biases the diode at one of those points"
    )


class Result(_Out):
    format: Literal["ringwise.result"] = "ringwise.result"
    version: Literal[1] = 1
    name: str
    topology: str
    operating_point: OperatingPointOut
    small_signal: SmallSignalOut
    tank: TankOut
    loop: LoopOut
    poles: PolesOut
    startup: StartupOut
    steady_state: SteadyStateOut | None = Field(
        description="Periodic steady state (null on the sheet's first, small-signal answer)"
    )
    verdict: VerdictOut
    stability: StabilityOut
    crystal: CrystalOut | None = Field(
        default=None, description="The crystal's figures (null: a coil in the tank)"
    )
    output: OutputOut | None = Field(
        default=None, description="Power, voltage and harmonics at the load (null: no load)"
    )
    tuning: TuningOut | None = Field(
        default=None, description="Across the varactor's tuning range (null: no varactor)"
    )
    warnings: list[WarningOut]


class WaveformOut(_Out):
    t: list[Num] = Field(description="Time of the last cycles, s")
    v_out: list[Num] = Field(description="Output tank node voltage, V")
    v_be: list[Num] = Field(description="Base-emitter voltage, V")


class EnvelopeOut(_Out):
    t: list[Num] = Field(description="Time, s")
    v: list[Num] = Field(description="Half peak-to-peak of each period at the output node, V")


class SpectrumOut(_Out):
    f: list[Num] = Field(description="Frequency, Hz")
    dBc: list[Num] = Field(description="Level relative to the fundamental, dB")


class TransientOut(_Out):
    f_meas: Num = Field(description="Frequency from zero crossings of the last cycles, Hz")
    amp_out_peak: Num = Field(description="Steady peak amplitude at the output node, V")
    amp_out_pp: Num = Field(description="Steady peak-to-peak at the output node, V")
    amp_out_fund: Num = Field(description="Fundamental amplitude at the output node (FFT), V")
    amp_be_fund: Num = Field(description="Base-emitter fundamental amplitude (FFT), V")
    thd: Num = Field(description="Total harmonic distortion at the output node (ratio)")
    harmonics_dBc: list[Num] = Field(description="2nd, 3rd, ... harmonic levels, dBc")
    t_startup_90: Num = Field(description="Time to 90 % of the final amplitude, s")
    VE_shift: Num = Field(description="Shift of the average emitter voltage from DC, V")
    squegging: bool
    settled: bool
    cycles_run: Num
    steps: int
    rejected_steps: int
    bias_time_constant: Num = Field(description="Longest bias-network time constant, s")
    notes: list[str]
    waveform: WaveformOut
    envelope: EnvelopeOut
    spectrum: SpectrumOut


class SimulationResult(_Out):
    format: Literal["ringwise.simulation"] = "ringwise.simulation"
    version: Literal[1] = 1
    name: str
    topology: str
    output_node: str
    transient: TransientOut
    warnings: list[WarningOut]


class PercentilesOut(_Out):
    p1: Num
    p5: Num
    p50: Num
    p95: Num
    p99: Num


class HistogramOut(_Out):
    edges: list[float]
    counts: list[int]


class WorstCaseOut(_Out):
    sample: int
    T_C: Num
    V_tune: Num = Field(default=None, description="Tuning voltage of the corner, V (a varactor)")
    gain: Num
    f_osc: Num
    parts: dict[str, float]


class SensitivityOut(_Out):
    part: str
    value: Num
    tolerance: Num = Field(description="Tolerance (fraction) the spread used for this part")
    S_f: Num = Field(description="∂ln f_osc/∂ln x")
    S_gain: Num = Field(description="∂ln |T|/∂ln x")
    f_spread: Num = Field(description="|S_f|·tolerance: its share of the frequency spread")
    gain_spread: Num = Field(description="|S_gain|·tolerance: its share of the gain spread")


class TemperaturePointOut(_Out):
    T_C: Num
    p5: Num = Field(description="5th percentile of f_osc at this temperature, Hz")
    p50: Num
    p95: Num


class CrystalCornerOut(_Out):
    """The spread's worst corner for the crystal's negative-resistance margin."""

    sample: int
    T_C: Num
    margin: Num = Field(description="|R_neg|/R₁ there")
    R_neg: Num = Field(description="Negative resistance at the motional arm there, Ω")
    parts: dict[str, float]


class SpreadOut(_Out):
    samples: int = Field(description="Samples computed (fewer than requested if stopped)")
    requested: int = Field(description="Samples asked for")
    stopped: bool = Field(
        description="Stopped before the end: every figure is of the samples computed"
    )
    seed: int
    temperatures_C: list[float]
    margin: Num = Field(description="Loop gain the margin yield asks for")
    yield_start: Num = Field(description="Fraction that start at every temperature")
    yield_margin: Num = Field(description="Fraction above the margin at every temperature")
    yield_by_temperature: dict[str, float]
    in_window: Num = Field(description="Fraction that start inside the frequency window")
    window: list[float] | None
    f_osc: PercentilesOut
    gain: PercentilesOut
    f_histogram: HistogramOut
    gain_histogram: HistogramOut
    worst_cases: list[WorstCaseOut]
    f_vs_temperature: list[TemperaturePointOut] = Field(
        description="f_osc band (5/50/95 %) across the temperature range"
    )
    sensitivities: list[SensitivityOut] = Field(description="Ranked: what to tighten first")
    tuning_voltages: list[float] | None = Field(
        default=None,
        description="With a varactor: the tuning voltages every temperature is solved at "
        "(the yield asks it to start at every one), V",
    )
    crystal_margin_min: Num = Field(
        default=None, description="With a crystal: lowest |R_neg|/R₁ over every corner"
    )
    crystal_margin_yield: Num = Field(
        default=None, description="Fraction with |R_neg|/R₁ ≥ 5 at every corner (a crystal)"
    )
    crystal_worst: CrystalCornerOut | None = Field(
        default=None, description="The corner with the lowest |R_neg|/R₁ (a crystal)"
    )


class SpreadResult(_Out):
    format: Literal["ringwise.spread"] = "ringwise.spread"
    version: Literal[1] = 1
    name: str
    spread: SpreadOut
