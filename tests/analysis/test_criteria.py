"""One meaning of "active", "starts" and the headroom limit."""

from __future__ import annotations

import numpy as np

from ringwise.analysis.criteria import (
    CUTOFF_CURRENT,
    REGIONS,
    SATURATION_FRACTION,
    START_GAIN,
    Region,
    region_codes,
    region_of,
    starts,
)


def test_regions_from_the_junction_currents() -> None:
    assert region_of(1e-3, 1e-9) is Region.ACTIVE
    assert region_of(1e-3, 2 * SATURATION_FRACTION * 1e-3) is Region.SATURATION
    assert region_of(0.5 * CUTOFF_CURRENT, 0.0) is Region.CUTOFF
    codes = region_codes(np.array([1e-3, 1e-3, 1e-12, np.nan]), np.array([0.0, 1e-3, 0.0, 0.0]))
    assert [REGIONS[c] for c in codes] == [
        Region.ACTIVE,
        Region.SATURATION,
        Region.CUTOFF,
        Region.CUTOFF,
    ]


def test_starts_needs_an_active_transistor_and_the_threshold_gain() -> None:
    gains = np.array([START_GAIN, 0.999, 5.0, np.nan, 5.0])
    active = np.array([True, True, True, True, False])
    assert starts(gains, active).tolist() == [True, False, True, False, False]
    assert not starts(None, True)
