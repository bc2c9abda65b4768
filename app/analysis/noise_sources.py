r"""The circuit's own noise sources, each as an incidence vector and a density along the orbit.

A noise source enters the MNA equations C·ẋ + i(x) = b as an extra term of
``b``: a current between two nodes (``vector`` = e_a − e_b, the incidence
of the element's own current) or a voltage into a branch row (in series
with the coil or the supply).  Its
one-sided power spectral density may vary along the period (cyclostationary
shot noise follows the device current); it is sampled at the orbit's points.

* **Thermal noise** of every resistor, a current of density 4kT/R across it
  (Johnson–Nyquist); the coil's loss resistance R_s as a voltage of density
  4kT·R_s in series with the coil (its branch row); the load is a resistor
  of the netlist like the others.  The G_MIN conductances (numerical, not
  parts) are left out.
* **Shot noise** of the transistor: 2q·|I_C(t)| in parallel with the
  collector current, 2q·|I_B(t)| with the base current, both following the
  currents along the orbit (white, cyclostationary).
* **Base-current flicker noise**: density K_F·|I_B(t)|^A_F / f in parallel
  with the base current (the SPICE form, modulated along the orbit); K_F and
  A_F are entered on the sheet.
* **Supply noise** (optional): a voltage of the density the user enters, in
  series with the supply (its branch row).

References
----------
J. B. Johnson, "Thermal agitation of electricity in conductors", and
H. Nyquist, "Thermal agitation of electric charge in conductors", Phys. Rev.
32, 1928; Gray, Hurst, Lewis & Meyer, *Analysis and Design of Analog
Integrated Circuits*, ch. 11 (shot noise 2qI, flicker K·I^a/f of the base
current, both from memory); A. Demir, A. Mehrotra & J. Roychowdhury, IEEE
TCAS-I 47(5), 2000 (cyclostationary sources in the PPV theory), from memory.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

import numpy as np
from scipy import constants

from ringwise.circuit.mna import Layout, incidence
from ringwise.circuit.netlist import NPN, DCSupply, Inductor, Netlist, Resistor

#: Kinds of source, as named in the result contract.
THERMAL: Final = "thermal"
COLLECTOR_SHOT: Final = "collector shot"
BASE_SHOT: Final = "base shot"
BASE_FLICKER: Final = "base flicker"
SUPPLY: Final = "supply"
KINDS: Final = (THERMAL, COLLECTOR_SHOT, BASE_SHOT, BASE_FLICKER, SUPPLY)


@dataclass(frozen=True)
class NoiseSource:
    """One noise source of the circuit: where it enters and its density law.

    The one-sided density is ``scale`` for a constant source and
    ``scale·|φ_i|^exponent`` for one that follows the device current
    φ_i (``current`` = 0 for I_C, 1 for I_B); A²/Hz on node rows, V²/Hz on
    branch rows.  For a flicker source it is the density at 1 Hz (at f it is
    density/f).

    Attributes
    ----------
    part : the element it belongs to ("RB1", "L", "Q1", "Vcc", ...)
    kind : one of :data:`KINDS`
    vector : (n,) where it enters the equations' right-hand side
    scale : 4kT/R (A²/Hz), 4kT·R_s (V²/Hz), 2q (A/Hz), K_F or a supply's density
    current : index of the device current the density follows, or ``None``
    exponent : power of that current (1 for shot noise, A_F for flicker)
    flicker : True for a 1/f source
    """

    part: str
    kind: str
    vector: np.ndarray
    scale: float
    current: int | None = None
    exponent: float = 1.0
    flicker: bool = False

    @property
    def name(self) -> str:
        return f"{self.part} {self.kind}"

    def density(self, phi: np.ndarray) -> np.ndarray:
        """The density with the device currents ``phi`` (..., 2): shape ``phi.shape[:-1]``."""
        if self.current is None:
            return np.full(phi.shape[:-1], self.scale)
        return self.scale * np.abs(phi[..., self.current]) ** self.exponent


def circuit_sources(
    netlist: Netlist,
    layout: Layout,
    T_kelvin: float,
    K_F: float,
    A_F: float,
    supply_density: float | None = None,
) -> list[NoiseSource]:
    r"""Every noise source of ``netlist``.

    Parameters
    ----------
    netlist, layout : the circuit and its MNA layout (the orbit's unknowns)
    T_kelvin : temperature of the resistors and the junctions, K
    K_F : flicker coefficient of the base current, A^(2−A_F)
    A_F : flicker exponent of the base current
    supply_density : noise voltage density of the supply, V/√Hz (``None``: none)
    """
    kT4 = 4.0 * constants.k * T_kelvin
    q2 = 2.0 * constants.e
    sources: list[NoiseSource] = []
    for el in netlist:
        if isinstance(el, Resistor) and np.isfinite(el.R):
            vec = layout.unit(el.a) - layout.unit(el.b)
            sources.append(NoiseSource(el.name, THERMAL, vec, kT4 / el.R))
        elif isinstance(el, Inductor) and el.R_s > 0.0:
            sources.append(NoiseSource(el.name, THERMAL, _branch(layout, el.name), kT4 * el.R_s))
        elif isinstance(el, NPN):
            inc = incidence(layout, el)
            sources += [
                NoiseSource(el.name, COLLECTOR_SHOT, inc.P_C, q2, current=0),
                NoiseSource(el.name, BASE_SHOT, inc.P_B, q2, current=1),
            ]
            if K_F > 0.0:
                sources.append(
                    NoiseSource(el.name, BASE_FLICKER, inc.P_B, K_F, 1, A_F, flicker=True)
                )
        elif isinstance(el, DCSupply) and supply_density:
            vec = _branch(layout, el.name)
            sources.append(NoiseSource(el.name, SUPPLY, vec, supply_density**2))
    return sources


def _branch(layout: Layout, name: str) -> np.ndarray:
    """Unit vector on the branch row of ``name`` (a voltage in series with it)."""
    vec = np.zeros(layout.size)
    vec[layout.branch[name]] = 1.0
    return vec
