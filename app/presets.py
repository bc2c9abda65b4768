"""Generic transistor classes for the device fields.

These are classes of part, not products: the values are typical of the class,
from memory, and meant as starting points to be replaced by the data of the
part actually fitted.
"""

from __future__ import annotations

from typing import Final

#: Typical values, from memory.  Units: beta (1), IS (A at 25 °C), VA (V),
#: fT (Hz), C_mu (F).
DEVICE_PRESETS: Final[dict[str, dict[str, float]]] = {
    "general-purpose": {
        "beta": 200.0,
        "IS": 1.0e-14,
        "VA": 100.0,
        "fT": 300e6,
        "C_mu": 3.5e-12,
    },
    "rf": {
        "beta": 100.0,
        "IS": 2.0e-16,
        "VA": 40.0,
        "fT": 5e9,
        "C_mu": 0.5e-12,
    },
    "high-beta-low-noise": {
        "beta": 450.0,
        "IS": 2.0e-14,
        "VA": 80.0,
        "fT": 150e6,
        "C_mu": 4.5e-12,
    },
}

DEVICE_PRESET_LABELS: Final[dict[str, str]] = {
    "general-purpose": "General-purpose small-signal NPN",
    "rf": "RF NPN (multi-GHz fT)",
    "high-beta-low-noise": "High-beta low-noise NPN",
}

#: Varactor classes: zero-bias capacitance C_j0 (F), built-in potential phi_j (V),
#: grading coefficient m_j, series resistance R_v (Ω) and a usual tuning range
#: (V_min, V_max in V).  Typical values, from memory: an abrupt junction has
#: m ≈ 1/2; a hyperabrupt one m ≈ 1 or above, for a wider capacitance ratio.
VARACTOR_PRESETS: Final[dict[str, dict[str, float]]] = {
    "abrupt": {"C_j0": 50e-12, "phi_j": 0.7, "m_j": 0.5, "R_v": 0.5, "V_min": 1.0, "V_max": 8.0},
    "hyperabrupt": {
        "C_j0": 100e-12,
        "phi_j": 0.7,
        "m_j": 1.0,
        "R_v": 1.0,
        "V_min": 1.0,
        "V_max": 8.0,
    },
}

VARACTOR_PRESET_LABELS: Final[dict[str, str]] = {
    "abrupt": "Abrupt junction (m ≈ 0.5)",
    "hyperabrupt": "Hyperabrupt junction (m ≈ 1, wider ratio)",
}
