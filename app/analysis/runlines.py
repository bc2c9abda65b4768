"""What a time-domain run's last cycles show besides the carrier and its harmonics.

* **Spectral lines** that are not harmonics: a line at f/2 (and 3f/2, …) is a
  period-doubled waveform (alternate cycles differ); any other line above the
  floor is a modulation or a second oscillation.  The spectrum is taken over a
  whole number of *pairs* of periods, so f/2 falls on a bin.
* **Envelope modulation**: the per-period amplitude swinging about its mean
  (depth as a ± fraction, and its period), the signature of squegging when it
  is slow and deep.
* **Envelope for plotting**: per-period amplitudes alternate on a
  period-doubled waveform, which draws as a solid band; the upper envelope of
  each pair of periods draws as a line.

Thresholds are common practice, no source.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

import numpy as np

#: Lines reported above this level relative to the fundamental, dB.
LINE_FLOOR_DBC: Final = -40.0
#: Largest number of lines reported.
MAX_LINES: Final = 8
#: A line within this fraction of a bin of k·f/2 is named by that fraction.
BIN_SLACK: Final = 0.5
#: Envelope modulation reported above this ± fraction of the mean.
MODULATION_FLOOR: Final = 0.02
#: Alternate periods differing by more than this fraction of the mean: the
#: envelope is taken per pair of periods for plotting.
ALTERNATION: Final = 0.02
#: ... in at least this share of successive pairs of steps (up, down, up …).
ALTERNATING_SHARE: Final = 0.8
#: Samples per period for the line spectrum.
SAMPLES_PER_PERIOD: Final = 64


@dataclass(frozen=True)
class Line:
    """A spectral line: frequency (Hz), level (dBc) and what it is, in words."""

    f: float
    dBc: float
    kind: str


def lines(t: np.ndarray, v: np.ndarray, crossings: np.ndarray) -> list[Line]:
    """Non-harmonic lines of v over the whole pairs of periods between ``crossings``.

    ``crossings`` are the rising zero crossings (about the mean) of the
    stretch to analyse, s.
    """
    pairs = (len(crossings) - 1) // 2
    if pairs < 2:
        return []
    n = 2 * pairs  # periods
    grid = np.linspace(crossings[0], crossings[n], n * SAMPLES_PER_PERIOD, endpoint=False)
    spec = np.abs(np.fft.rfft(np.interp(grid, t, v) - np.mean(v))) / len(grid) * 2.0
    f_bin = 1.0 / (crossings[n] - crossings[0])  # one bin, Hz
    fund = spec[n]
    if not fund > 0:
        return []
    out = []
    top = min(len(spec) - 1, 4 * n)
    for k in range(1, top):
        if k % n == 0 or spec[k] < spec[k - 1] or spec[k] < spec[k + 1]:
            continue  # harmonics are reported elsewhere; only local peaks
        level = 20.0 * math.log10(spec[k] / fund)
        if level < LINE_FLOOR_DBC:
            continue
        ratio = k / n
        if abs(2 * ratio - round(2 * ratio)) * n <= BIN_SLACK and round(2 * ratio) % 2 == 1:
            half = round(2 * ratio)
            kind = "subharmonic f/2" if half == 1 else f"subharmonic {half}f/2"
        else:
            kind = f"non-harmonic line at {ratio:.3g}·f"
        out.append(Line(float(k * f_bin), level, kind))
    out.sort(key=lambda line: -line.dBc)
    return out[:MAX_LINES]


@dataclass(frozen=True)
class Modulation:
    """Envelope modulation: depth (± fraction of the mean) and period (s, ``None`` if none)."""

    depth: float
    period: float | None


def modulation(env_t: np.ndarray, env: np.ndarray) -> Modulation:
    """Depth and period of the envelope's swing over the stretch given."""
    if env.size < 4:
        return Modulation(0.0, None)
    mean = float(np.mean(env))
    depth = float((env.max() - env.min()) / (2.0 * mean)) if mean > 0 else 0.0
    centred = env - mean
    ups = np.nonzero((centred[:-1] < 0) & (centred[1:] >= 0))[0]
    period = float((env_t[ups[-1]] - env_t[ups[0]]) / (len(ups) - 1)) if len(ups) >= 3 else None
    return Modulation(depth, period)


def alternates(env: np.ndarray) -> bool:
    """Whether alternate periods' amplitudes differ (a period-doubled waveform).

    The per-period amplitude must step up and down in turn (most successive
    steps of opposite sign) by more than ALTERNATION of the mean: an envelope
    that rises or collapses smoothly (squegging) steps one way for many
    periods and is not period-doubled.
    """
    if env.size < 6:
        return False
    steps = np.diff(env)
    big = np.abs(steps) > ALTERNATION * np.mean(env)
    flips = (steps[:-1] * steps[1:] < 0) & big[:-1] & big[1:]
    return bool(np.mean(flips) >= ALTERNATING_SHARE)


def running_mean(t: np.ndarray, v: np.ndarray, width: float) -> np.ndarray:
    """The mean of v over a window ``width`` wide centred on each sample (trapezoidal
    integral, any spacing of t); near the ends of the run the window is moved
    inward, so it always spans a whole period.

    Over one period it removes the carrier and keeps the bias drift, so the
    crossings of v about it find every period even while the DC level moves
    (a squegging stage's collector swings by volts as the bias collapses).
    """
    area = np.concatenate(([0.0], np.cumsum(0.5 * (v[1:] + v[:-1]) * np.diff(t))))
    width = min(width, float(t[-1] - t[0]))
    if not width > 0:
        return np.full_like(v, float(np.mean(v)))
    lo = np.clip(t - 0.5 * width, t[0], t[-1] - width)
    return (np.interp(lo + width, t, area) - np.interp(lo, t, area)) / width


def upper_envelope(env_t: list[float], env: list[float]) -> tuple[list[float], list[float]]:
    """The larger amplitude of each pair of periods, at the pair's middle."""
    t, v = np.asarray(env_t), np.asarray(env)
    pairs = len(v) // 2
    if pairs < 1:
        return list(env_t), list(env)
    vv = v[: 2 * pairs].reshape(pairs, 2).max(axis=1)
    tt = t[: 2 * pairs].reshape(pairs, 2).mean(axis=1)
    return tt.tolist(), vv.tolist()
