r"""What the oscillator delivers into its load: power, voltage, harmonics, pulling.

The load is the resistance ``R_load`` at the output tank node t1 — a
resistor, or a following buffer's input resistance — optionally with the
buffer's input capacitance ``C_load`` across it; both are elements of the
one netlist, so every analysis sees them.  The figures come from the
periodic steady state (:func:`ringwise.analysis.periodic.steady_state`):
with v(t) the orbit's voltage across the load over one period T,

.. math:: V_{rms} = \sqrt{\tfrac1T\int_0^T v^2\,dt},\qquad
          P = \frac{1}{T}\int_0^T \frac{v^2}{R_{load}}\,dt = \frac{V_{rms}^2}{R_{load}},

P in dBm = 10·log10(P / 1 mW); harmonics are the orbit's Fourier
amplitudes of v at 2f, 3f, … relative to the fundamental (dBc).

Pulling by a load change: the oscillation frequency (small-signal loop
crossing, the operating point re-solved) with the load's resistance lowered
and its capacitance raised by the stated fraction ``load.change`` — a
buffer that loads the tank harder — against the design as entered, in ppm.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

import numpy as np

from ringwise.analysis.operating import Solved
from ringwise.analysis.periodic import HARMONICS, SteadyState
from ringwise.analysis.stability import Neighbours, neighbours
from ringwise.circuit.topologies import T1

#: Reference power of the dBm scale, W.
DBM_REFERENCE: Final = 1e-3


@dataclass(frozen=True)
class LoadOutput:
    """The load's figures; ``None`` fields where the oscillator has no steady orbit.

    Attributes
    ----------
    R_load : load resistance, Ω
    C_load : load capacitance, F (``None`` when none)
    V_rms : RMS voltage across the load, V
    V_peak : largest |v| across the load, V
    P : power delivered into R_load, W
    P_dBm : the same in dBm
    harmonics_dBc : 2nd … harmonics of the load voltage, dBc
    change : the stated load change, fraction
    pull_ppm : f_osc with the changed load against f_osc as entered, ppm
    """

    R_load: float
    C_load: float | None
    V_rms: float | None
    V_peak: float | None
    P: float | None
    P_dBm: float | None
    harmonics_dBc: list[float | None]
    change: float
    pull_ppm: float | None


def load_output(
    solved: Solved, steady: SteadyState | None, near: Neighbours | None = None
) -> LoadOutput | None:
    """Power, voltage and harmonics at the load from the steady state; pulling
    (from ``near``, :func:`ringwise.analysis.stability.neighbours` of ``solved``,
    when the caller has it)."""
    load = solved.design.load
    if load.R_load is None:
        return None
    V_rms = V_peak = P = P_dBm = None
    harmonics: list[float | None] = []
    orbit = steady.orbit if steady is not None else None
    if orbit is not None:
        v = orbit.x[:, solved.system.layout.node[T1]]
        V_rms = float(math.sqrt(float(orbit.mean(v * v))))
        V_peak = float(np.max(np.abs(v)))
        P = V_rms**2 / load.R_load
        P_dBm = 10.0 * math.log10(P / DBM_REFERENCE) if P > 0 else None
        spectrum = np.abs(orbit.fourier(v, HARMONICS))
        harmonics = [
            20.0 * math.log10(h / spectrum[1]) if h > 0 and spectrum[1] > 0 else None
            for h in spectrum[2:]
        ]
    return LoadOutput(
        R_load=load.R_load,
        C_load=load.C_load,
        V_rms=V_rms,
        V_peak=V_peak,
        P=P,
        P_dBm=P_dBm,
        harmonics_dBc=harmonics,
        change=load.change,
        pull_ppm=(near or neighbours(solved)).load_change_ppm,
    )
