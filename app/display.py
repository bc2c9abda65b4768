"""The figures the result shows, declared once: result path, unit, label (and panel).

The sheet, the summary, the JSON twins and the command line's table all
read these tables; nothing else lists which figures exist or what they are
called.  Units are SI symbols (``"Hz"``, ``"Ω"``, ``"A"``) or a few named
kinds: ``""`` a plain ratio, ``"dB"``, ``"dBm"``, ``"dBc"``, ``"ppm"``, ``"ppm/pF"``,
``"%"`` a fraction shown in per cent, ``"text"`` a word, ``"yesno"`` a flag,
``"behaviour"`` the steady state's behaviour in words, ``"cycles"`` a count of
periods, and ``"param"`` the unit of the threshold's parameter
(:data:`PARAM_UNITS`).  Formatting to text happens only here and in
:mod:`ringwise.units`.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, Final, NamedTuple

from ringwise.units import format_si


class Figure(NamedTuple):
    """One shown figure of the analysis: where it is in the result, its unit,
    its label and the sheet panel it sits in."""

    path: str
    unit: str
    label: str
    panel: str


class Row(NamedTuple):
    """A shown figure outside the four panels (stability block, time-domain run)."""

    path: str
    unit: str
    label: str


#: Figures the sheet shows, in order: (result path, display unit, label, panel).
#: The unit ``"param"`` means "the unit of the threshold's parameter".
SHOWN: Final = tuple(
    Figure(*row)
    for row in (
        ("tank.f_ideal", "Hz", "Ideal resonance 1/(2π√(L·Cs))", "frequency"),
        ("loop.f_osc", "Hz", "Oscillation frequency (zero loop phase)", "frequency"),
        ("tank.C_series", "F", "Series capacitance Cs", "frequency"),
        ("tank.feedback_ratio", "", "Feedback ratio C1/C2", "frequency"),
        ("loop.Q_loaded", "", "Loaded Q (from the phase slope)", "frequency"),
        ("steady_state.f", "Hz", "Frequency at full amplitude", "frequency"),
        ("stability.pushing_Hz_per_V", "Hz/V", "Pushing df/dVcc", "frequency"),
        ("loop.gain_ideal", "", "Loop gain, hand method", "loop"),
        ("loop.gain", "", "Loop gain, full circuit", "loop"),
        ("startup.margin_dB", "dB", "Margin over the threshold of 1", "loop"),
        ("startup.threshold_param", "text", "Part set to loop gain 1", "loop"),
        ("startup.threshold_value", "param", "Its value at loop gain 1", "loop"),
        ("tank.R_s", "Ω", "Coil series loss R_s", "loop"),
        ("loop.Z_out", "Ω", "Load on the controlled source", "loop"),
        ("poles.growth_time", "s", "Envelope growth time 1/σ", "loop"),
        ("steady_state.behaviour", "behaviour", "Once running, the oscillation", "swing"),
        ("steady_state.settle_cycles", "cycles", "Periods to settle to 1 %", "swing"),
        ("steady_state.amp_out", "V", "Output amplitude (fundamental)", "swing"),
        ("steady_state.output_node", "text", "Output taken at", "swing"),
        ("steady_state.amp_be", "V", "Base-emitter amplitude", "swing"),
        ("steady_state.thd", "%", "THD at the output", "swing"),
        ("steady_state.IC_avg", "A", "Average I_C over the period", "swing"),
        ("steady_state.VCE_min", "V", "Lowest V_CE (saturation margin)", "swing"),
        ("steady_state.P_tank", "W", "Signal power in the coil loss", "swing"),
        ("steady_state.P_in", "W", "DC input power", "swing"),
        ("steady_state.efficiency", "%", "Efficiency (coil loss + load over DC input)", "swing"),
        ("operating_point.IC", "A", "Collector current I_C", "bias"),
        ("operating_point.VCE", "V", "V_CE", "bias"),
        ("operating_point.VBE", "V", "V_BE", "bias"),
        ("operating_point.VB", "V", "Base voltage", "bias"),
        ("operating_point.VE", "V", "Emitter voltage", "bias"),
        ("operating_point.VC", "V", "Collector voltage", "bias"),
        ("operating_point.I_divider", "A", "Divider current (RB2)", "bias"),
        ("operating_point.P_device", "W", "Transistor dissipation", "bias"),
        ("operating_point.region", "text", "Region", "bias"),
        ("small_signal.gm", "S", "g_m", "bias"),
        ("small_signal.r_pi", "Ω", "r_π", "bias"),
        ("crystal.ppm_from_fs", "ppm", "Frequency against the series resonance", "crystal"),
        ("crystal.f_s", "Hz", "Series resonance f_s", "crystal"),
        ("crystal.f_p", "Hz", "Parallel resonance f_p", "crystal"),
        ("crystal.C_load", "F", "Load capacitance the circuit presents", "crystal"),
        ("crystal.R_neg", "Ω", "Negative resistance at the motional arm", "crystal"),
        ("crystal.margin", "", "Its ratio to R₁ (rule: ≥ 5)", "crystal"),
        ("crystal.pulling_ppm_per_pF", "ppm/pF", "Pulling by the load capacitance", "crystal"),
        ("crystal.P_drive", "W", "Drive level (steady state)", "crystal"),
        ("crystal.P_rating", "W", "Drive-level rating", "crystal"),
        ("crystal.startup_time", "s", "Startup time (growth rate, from 1 µV)", "crystal"),
        ("tuning.f_low", "Hz", "f_osc at V_min", "tuning"),
        ("tuning.f_high", "Hz", "f_osc at V_max", "tuning"),
        ("tuning.tuning_ratio", "", "Tuning ratio f_high/f_low", "tuning"),
        ("tuning.K_at_min", "Hz/V", "Tuning gain K at V_min", "tuning"),
        ("tuning.K_at_max", "Hz/V", "Tuning gain K at V_max", "tuning"),
        ("tuning.K_ratio", "", "K end to end, K(V_min)/K(V_max)", "tuning"),
        ("tuning.min_gain", "", "Lowest loop gain across the range", "tuning"),
        ("tuning.starts_everywhere", "yesno", "Starts at every tuning voltage", "tuning"),
        ("tuning.points.0.behaviour", "behaviour", "At V_min, once running", "tuning"),
        ("tuning.points.1.behaviour", "behaviour", "Mid-range, once running", "tuning"),
        ("tuning.points.2.behaviour", "behaviour", "At V_max, once running", "tuning"),
        ("tuning.points.0.V_diode_min", "V", "At V_min, lowest junction voltage", "tuning"),
        ("tuning.points.0.V_rf_peak", "V", "At V_min, RF swing on the diode (peak)", "tuning"),
        ("tuning.forward_biased", "yesno", "RF swing forward-biases the diode", "tuning"),
        ("output.P_dBm", "dBm", "Power into the load", "output"),
        ("output.P", "W", "Power into the load, watts", "output"),
        ("output.V_rms", "V", "Voltage across the load, RMS", "output"),
        ("output.V_peak", "V", "Voltage across the load, peak", "output"),
        ("output.harmonics_dBc.0", "dBc", "2nd harmonic at the load", "output"),
        ("output.harmonics_dBc.1", "dBc", "3rd harmonic at the load", "output"),
        ("output.change", "%", "Load change for the pulling figure", "output"),
        ("output.pull_ppm", "ppm", "Frequency moved by that change", "output"),
    )
)

PANELS: Final = (
    ("frequency", "Frequency and tank"),
    ("loop", "Loop gain and startup"),
    ("swing", "Steady oscillation (periodic steady state)"),
    ("bias", "Operating point"),
    ("output", "Into the load (periodic steady state)"),
    ("crystal", "Crystal"),
    ("tuning", "Varactor tuning (V_min, middle, V_max)"),
)
#: Panels shown only when the result has their section (a load, a crystal, a varactor).
OPTIONAL_PANELS: Final = ("output", "crystal", "tuning")

#: The summary's panels (its stability block, steady-state, load and crystal
#: lines are its own).
SUMMARY_PANELS: Final = tuple(p for p in PANELS if p[0] not in ("swing", *OPTIONAL_PANELS))

#: The stability panel's figures besides the phase-noise points: (path, unit, label).
STABILITY_SHOWN: Final = tuple(
    Row(*row)
    for row in (
        ("stability.Q_loaded", "", "Loaded Q (phase slope)"),
        ("stability.P_signal", "W", "Signal power P_s in the resonator loss"),
        ("stability.F_dB", "dB", "Noise factor F used"),
        ("stability.f_corner", "Hz", "Flicker corner used"),
        ("stability.leeson_corner", "Hz", "Leeson corner f0/(2·Q)"),
        ("stability.pushing_Hz_per_V", "Hz/V", "Pushing df/dVcc"),
        ("stability.pulling_Hz", "Hz", "Pulling: f with the load − f open"),
        ("stability.pulling_Hz_per_ohm", "Hz/Ω", "df/dR_load at the load"),
    )
)

#: The phase noise computed from the circuit's noise sources: (path, unit, label).
NOISE_SHOWN: Final = tuple(
    Row(*row)
    for row in (
        ("stability.F_effective_dB", "dB", "Effective noise factor (the F Leeson would need)"),
        ("stability.diffusion", "s", "Phase diffusion constant c"),
        ("stability.flicker_corner", "Hz", "1/f³ corner (flicker up-conversion)"),
    )
)

#: Of those, the ones the summary's stability block lists.
SUMMARY_STABILITY: Final = (
    "stability.Q_loaded",
    "stability.P_signal",
    "stability.pushing_Hz_per_V",
    "stability.pulling_Hz",
)

#: The time-domain run's figures: (path in the simulation result, unit, label).
RUN_SHOWN: Final = tuple(
    Row(*row)
    for row in (
        ("transient.f_meas", "Hz", "Measured frequency (zero crossings)"),
        ("transient.amp_out_peak", "V", "Output peak amplitude"),
        ("transient.amp_out_pp", "V", "Output peak-to-peak"),
        ("transient.amp_out_fund", "V", "Output fundamental (FFT)"),
        ("transient.amp_be_fund", "V", "Base-emitter fundamental (FFT)"),
        ("transient.thd", "%", "THD at the output"),
        ("transient.t_startup_90", "s", "Startup to 90 % of the final amplitude"),
        ("transient.VE_shift", "V", "Shift of the average emitter voltage"),
        ("transient.squegging", "yesno", "Squegging seen"),
        ("transient.settled", "yesno", "Envelope settled"),
        ("transient.cycles_run", "", "Cycles run"),
        ("transient.bias_time_constant", "s", "Longest bias time constant"),
    )
)
#: Names of the harmonics in ``transient.harmonics_dBc`` (2nd, 3rd, ...).
ORDINALS: Final = ("2nd", "3rd", "4th", "5th", "6th", "7th", "8th", "9th")


#: Unit of each parameter a threshold can be sought on (the "param" unit).
PARAM_UNITS: Final = {
    "Vcc": "V", "RB1": "Ω", "RB2": "Ω", "RC": "Ω", "RE": "Ω", "R_load": "Ω",
    "CE": "F", "CB": "F", "C1": "F", "C2": "F", "C3": "F", "Cc1": "F", "Cc2": "F",
    "L": "H", "Q_L": "", "L_ch": "H", "Q_ch": "", "f_ch": "Hz", "C_load": "F",
    "R_x1": "Ω", "L_x1": "H", "f_xs": "Hz", "C_x1": "F", "C_x0": "F", "P_xmax": "W",
    "C_j0": "F", "phi_j": "V", "m_j": "", "R_v": "Ω", "C_v": "F", "R_tune": "Ω", "V_tune": "V",
    "beta": "", "IS": "A", "VA": "V", "fT": "Hz", "C_mu": "F",
    "F_dB": "dB", "f_corner": "Hz", "V_cap": "V", "temperature_C": "°C",
}  # fmt: skip


def lookup(result: Mapping[str, Any], path: str) -> Any:
    """The value at a dotted path of the result (``None`` where the result has none);
    a numeric part indexes a list (``stability.phase_noise.0.dBc_Hz``)."""
    value: Any = result
    for key in path.split("."):
        if isinstance(value, list) and key.isdigit() and int(key) < len(value):
            value = value[int(key)]
        elif isinstance(value, Mapping) and key in value:
            value = value[key]
        else:
            return None
    return value


#: The steady state's behaviour in words (the sheet, the summary, the table).
BEHAVIOUR_WORDS: Final = {
    "settles": "settles to a steady amplitude",
    "squegs": "squegs: the envelope swings and grows",
    "period-doubling": "period-doubles: alternate cycles differ",
    "unstable": "leaves its periodic orbit (unstable)",
    "no-orbit": "no steady oscillation",
}
#: Units shown as plain numbers with the unit, never with an SI prefix.
LOG_UNITS: Final = ("dBm", "dBc", "ppm", "ppm/pF")


def format_value(value: Any, unit: str) -> str:
    """Display text of a figure in one of the units above ("—" for a missing value).

    Quantities get SI prefixes (:func:`ringwise.units.format_si`), plain ratios
    and decibels four significant digits.
    """
    if unit == "text":
        return "—" if value is None else str(value)
    if unit == "behaviour":
        return "—" if value is None else BEHAVIOUR_WORDS[value]
    if unit == "cycles":
        return "—" if value is None else f"{value:.3g}"
    if unit in ("yesno", "valid"):
        return "—" if value is None else ("yes" if value else "no")
    if value is None:
        return "—"
    if unit == "%":
        return f"{100.0 * value:.3g} %"
    if unit in LOG_UNITS:
        return f"{value:.4g} {unit}"
    if unit in ("", "dB"):
        text = f"{value:.4g}"
        return f"{text} dB" if unit == "dB" else text
    return format_si(value, unit)


def unit_of(figure_unit: str, result: Mapping[str, Any]) -> str:
    """The concrete unit of a figure (``"param"`` resolved through the result)."""
    if figure_unit == "param":
        return PARAM_UNITS.get(lookup(result, "startup.threshold_param") or "", "")
    return figure_unit


def table(result: Mapping[str, Any]) -> list[dict[str, Any]]:
    """The analysis as rows of the shown figures, panel by panel:
    ``{"panel", "path", "label", "unit", "value", "text"}`` (the command line's table)."""
    titles = dict(PANELS)
    rows = []
    for key, _title in PANELS:
        for fig in SHOWN:
            if fig.panel != key:
                continue
            value = lookup(result, fig.path)
            unit = unit_of(fig.unit, result)
            rows.append(
                {
                    "panel": titles[key],
                    "path": fig.path,
                    "label": fig.label,
                    "unit": unit,
                    "value": value,
                    "text": format_value(value, unit),
                }
            )
    return rows
