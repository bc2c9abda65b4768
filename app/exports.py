"""CSV of every curve and sample set the tool computes, from the result models.

One writer (:func:`csv_text`) and one function per series.  Numbers are
written in SI base units with Python's shortest round-trip text (``repr``),
so reading a file back with the :mod:`csv` module and ``float`` gives exactly
the numbers the API returns; a missing value (no loop crossing, a non-finite
point) is an empty cell.  Headers name the quantity and its unit as
``name [unit]``.  The CLI (``--format csv``) and the sheet's download links
(``GET /api/sheet/csv``) print these same tables.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterable, Mapping, Sequence
from typing import Any, Final

#: A series: its header and its columns (equal lengths).
Table = tuple[list[str], list[list[Any]]]

#: The curves of each result, by the name used on the command line and in
#: the sheet's download links: (path of the parent in the result, columns as
#: (key, header)).
RESULT_SERIES: Final[dict[str, tuple[str, tuple[tuple[str, str], ...]]]] = {
    "phase-noise": ("stability.curve", (("offset", "offset [Hz]"), ("dBc_Hz", "L(f) [dBc/Hz]"))),
    "phase-noise-computed": (
        "stability.spectrum_curve",
        (("offset", "offset [Hz]"), ("dBc_Hz", "L(f) [dBc/Hz]")),
    ),
    "noise-sources": (
        "stability.sources",
        (
            ("name", "source"),
            ("share_1k", "share at 1 kHz"),
            ("share_100k", "share at 100 kHz"),
            ("diffusion", "diffusion [s]"),
        ),
    ),
    "tuning": (
        "tuning",
        (
            ("V", "V_tune [V]"),
            ("f_osc", "f_osc [Hz]"),
            ("K", "K [Hz/V]"),
            ("gain", "loop gain"),
            ("C_branch", "varactor branch [F]"),
        ),
    ),
    "waveform": (
        "transient.waveform",
        (("t", "t [s]"), ("v_out", "v_out [V]"), ("v_be", "v_be [V]")),
    ),
    "envelope": ("transient.envelope", (("t", "t [s]"), ("v", "amplitude [V]"))),
    "spectrum": ("transient.spectrum", (("f", "f [Hz]"), ("dBc", "level [dBc]"))),
}


def _cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    return str(value)


def csv_text(header: Sequence[str], rows: Iterable[Sequence[Any]]) -> str:
    """RFC 4180 CSV (``\\r\\n`` line ends, quoting where needed) of a header and rows."""
    out = io.StringIO()
    writer = csv.writer(out)
    writer.writerow(header)
    for row in rows:
        writer.writerow([_cell(v) for v in row])
    return out.getvalue()


def columns_csv(header: Sequence[str], columns: Sequence[Sequence[Any]]) -> str:
    """CSV of equal-length columns."""
    lengths = {len(c) for c in columns}
    if len(lengths) > 1:
        raise ValueError(f"columns of different lengths: {sorted(lengths)}")
    return csv_text(header, zip(*columns, strict=True))


def _at(data: Mapping[str, Any], path: str) -> Any:
    for key in path.split("."):
        data = data[key]
    return data


def result_series(result: Mapping[str, Any], name: str) -> Table:
    """A named curve (``phase-noise``, ``waveform``, ``envelope``, ``spectrum``, ...) of a
    result as JSON (``model_dump(mode="json")``); a list of records (``noise-sources``)
    becomes one row per record, an absent curve no rows."""
    path, cols = RESULT_SERIES[name]
    parent = _at(result, path)
    header = [h for _, h in cols]
    if parent is None:
        return header, [[] for _ in cols]
    if isinstance(parent, list):
        return header, [[row[k] for row in parent] for k, _ in cols]
    return header, [list(parent[k]) for k, _ in cols]


def sweep_table(sweep: Any) -> Table:
    """A :class:`~ringwise.analysis.threshold.Sweep` (part value in SI units)."""
    return (
        [f"{sweep.param} [SI]", "f_osc [Hz]", "loop gain", "valid"],
        [list(sweep.values), list(sweep.f_osc), list(sweep.gain), list(sweep.valid)],
    )


def samples_table(spread: Any) -> Table:
    """Every Monte Carlo sample at every corner of a
    :class:`~ringwise.analysis.spread.Spread` (each temperature, and with a varactor each
    tuning voltage at it): the drawn part values (at 25 °C), f_osc, loop gain and whether
    it starts there."""
    parts = list(spread.draws.values)
    tunes = list(spread.tuning_voltages or [None])
    corners = [(T, V) for T in spread.temperatures for V in tunes]
    tuned = spread.tuning_voltages is not None
    header = ["sample", "T [°C]", *(["V_tune [V]"] if tuned else []), *parts]
    header += ["f_osc [Hz]", "loop gain", "starts"]
    n = spread.samples
    cols: list[list[Any]] = [[] for _ in header]
    first = 3 if tuned else 2
    for (T, V), batch, starts in zip(corners, spread.batches, spread.starts, strict=True):
        cols[0] += range(n)
        cols[1] += [T] * n
        if tuned:
            cols[2] += [V] * n
        for j, part in enumerate(parts, start=first):
            cols[j] += [float(v) for v in spread.draws.values[part]]
        cols[-3] += [float(v) if math.isfinite(v) else None for v in batch.f_osc]
        cols[-2] += [float(v) if math.isfinite(v) else None for v in batch.gain]
        cols[-1] += [bool(s) for s in starts]
    return header, cols


def temperature_table(result: Mapping[str, Any]) -> Table:
    """The f_osc band against temperature of a spread result (JSON)."""
    rows = result["spread"]["f_vs_temperature"]
    keys = (("T_C", "T [°C]"), ("p5", "f_osc p5 [Hz]"), ("p50", "f_osc p50 [Hz]"))
    keys += (("p95", "f_osc p95 [Hz]"),)
    return [h for _, h in keys], [[r[k] for r in rows] for k, _ in keys]


def loop_table(loop: Mapping[str, Any]) -> Table:
    """The loop-gain curve the sheet plots (``curves.loop_curve``)."""
    return (
        ["f [Hz]", "|T|", "phase [deg]"],
        [list(loop["f"]), list(loop["magnitude"]), list(loop["phase_deg"])],
    )


def what_if_table(sweep: Mapping[str, Any]) -> Table:
    """The sheet's what-if sweep (``curves.what_if``)."""
    unit = sweep.get("unit") or "SI"
    return (
        [f"{sweep['param']} [{unit}]", "f_osc [Hz]", "loop gain"],
        [list(sweep["values"]), list(sweep["f_osc"]), list(sweep["gain"])],
    )


def tuning_table(tuning: Mapping[str, Any]) -> Table:
    """The tuning plot (``curves.tuning_curve``): f_osc, K and the loop gain against
    the tuning voltage."""
    return (
        ["V_tune [V]", "f_osc [Hz]", "K [Hz/V]", "loop gain"],
        [list(tuning["V"]), list(tuning["f_osc"]), list(tuning["K"]), list(tuning["gain"])],
    )


def reactance_table(reactance: Mapping[str, Any]) -> Table:
    """The tank parts' reactances the sheet plots (``curves.reactance_curves``)."""
    lines = reactance["lines"]
    return (
        ["f [Hz]", *(f"X_{line['part']} [Ω]" for line in lines)],
        [list(reactance["f"]), *(list(line["X"]) for line in lines)],
    )


def noise_table(noise: Mapping[str, Any]) -> Table:
    """The phase-noise plot (``curves.noise_curve``): the curve computed from the circuit's
    noise sources first (empty where there is no steady state), then Leeson's comparison,
    on the same offsets."""
    computed = noise.get("computed")
    if computed is not None and list(computed["offset"]) != list(noise["offset"]):
        raise ValueError("the computed and Leeson curves have different offsets")
    return (
        ["offset [Hz]", "L(f) computed [dBc/Hz]", "L(f) Leeson [dBc/Hz]"],
        [
            list(noise["offset"]),
            list(computed["dBc_Hz"]) if computed else [None] * len(noise["offset"]),
            list(noise["dBc_Hz"]),
        ],
    )
