"""What "active", "starts" and "enough headroom" mean: the one definition of each.

Every analysis that classifies an operating point or decides whether a
design starts reads these constants and functions — the single-design
verdict, the checks, the Monte Carlo yield and the large-signal estimates —
so a sample counted as starting by the yield is one the sheet calls
startable, sample by sample.

Bands and limits are common practice, no source: a loop gain below 1 does
not start; 1 to 2 is marginal (tolerances and temperature can take it below
1); 2 to 10 starts reliably; above 10 it starts but runs hard into limiting.
The transistor is cut off when its forward junction current is negligible,
saturated when its base-collector junction conducts a noticeable fraction of
the base-emitter one (V_CE below about 4.6·V_T), active otherwise.
"""

from __future__ import annotations

from enum import Enum
from typing import Final

import numpy as np

#: Forward junction current below which the transistor is called cut off, A.
CUTOFF_CURRENT: Final = 1e-9
#: The transistor is called saturated when the base-collector junction
#: current exceeds this fraction of the base-emitter one (V_CE ≲ 4.6 V_T).
SATURATION_FRACTION: Final = 0.01
#: Loop gain at which the oscillation starts (the Barkhausen threshold).
START_GAIN: Final = 1.0
#: Below this loop gain a starting design is only marginal.
MARGINAL_BELOW: Final = 2.0
#: Above this loop gain a design starts but is overdriven.
OVERDRIVEN_ABOVE: Final = 10.0
#: Smallest V_CE the swing may leave at its bottom before the collector runs
#: into saturation, V (the checks' headroom warning, the large-signal
#: estimate's validity and the synthesis's feasibility limit alike).
VCE_HEADROOM: Final = 0.3


class Region(str, Enum):
    ACTIVE = "active"
    SATURATION = "saturation"
    CUTOFF = "cut-off"


#: Region codes of :func:`region_codes`, in the order of ``REGIONS``.
REGIONS: Final = (Region.ACTIVE, Region.SATURATION, Region.CUTOFF)
ACTIVE_CODE: Final = 0


def region_codes(I_F: np.ndarray, I_R: np.ndarray) -> np.ndarray:
    """Region of each transistor as an index into ``REGIONS``, from its junction currents (A).

    Cut off when I_F < ``CUTOFF_CURRENT``; saturated when
    I_R > ``SATURATION_FRACTION``·I_F; active otherwise.  NaN currents (a DC
    solve that failed) count as cut off.
    """
    I_F = np.asarray(I_F, dtype=float)
    I_R = np.asarray(I_R, dtype=float)
    cutoff = ~(I_F >= CUTOFF_CURRENT)
    saturated = ~cutoff & (I_R > SATURATION_FRACTION * I_F)
    return np.where(cutoff, 2, np.where(saturated, 1, ACTIVE_CODE))


def region_of(I_F: float, I_R: float) -> Region:
    """The region of one transistor (see :func:`region_codes`)."""
    return REGIONS[int(region_codes(I_F, I_R))]


def starts(gain: np.ndarray | float | None, active: np.ndarray | bool) -> np.ndarray:
    """Whether the oscillation starts: the transistor is active and the loop gain
    (NaN, 0 or ``None`` when there is no zero-phase crossing) reaches ``START_GAIN``."""
    g = np.asarray(np.nan if gain is None else gain, dtype=float)
    return np.asarray(active) & (g >= START_GAIN)
