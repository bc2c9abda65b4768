"""What each ``ringwise`` command does (imported by :mod:`ringwise.cli` when one runs).

Every command prints a result model of the core: ``--format json`` its JSON
(as the API serves it), ``table`` its figures in engineering units with the
sheet's labels, ``csv`` its numbers in SI units (:mod:`ringwise.exports`).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Mapping
from typing import Any

from ringwise.analysis.analyze import analyze
from ringwise.analysis.reconcile import ReconcileError, reconcile
from ringwise.analysis.sensitivity import sensitivities
from ringwise.analysis.spread import SpreadError, monte_carlo, spread_out
from ringwise.analysis.synthesis import SynthesisError, synthesize
from ringwise.analysis.threshold import ParameterError, find_threshold, sweep
from ringwise.analysis.transient import SimulationError, simulate
from ringwise.circuit.topologies import gain_setter
from ringwise.cli import BadInputError
from ringwise.console import (
    load_design,
    print_csv,
    print_json,
    print_table,
    progress,
    read_json,
    records_out,
    validate_design,
)
from ringwise.exports import Table, result_series, samples_table, sweep_table, temperature_table
from ringwise.preferred import SeriesError, snap_design
from ringwise.units import UnitError, format_si, parse_quantity


def _value(text: str, what: str) -> float:
    try:
        return parse_quantity(text)
    except UnitError as err:
        raise BadInputError(f"{what}: {err}") from err


def _figures_out(rows: list[tuple[str, str, Any, str]], fmt: str) -> None:
    """Shown figures as (path, label, raw value, display text)."""
    if fmt == "csv":
        print_csv(["path", "label", "value"], ((p, label, v) for p, label, v, _ in rows))
    else:
        print_table(["figure", "value"], ((label, text) for _, label, _, text in rows))


def _series_out(table: Table, fmt: str) -> None:
    header, cols = table
    rows = list(zip(*cols, strict=True))
    if fmt == "csv":
        print_csv(header, rows)
    else:
        print_table(header, ([_number(v) for v in row] for row in rows))


def _number(value: Any) -> str:
    if value is None:
        return "—"
    if isinstance(value, bool | str):
        return str(value)
    return f"{value:.6g}"


def _analysis_figures(result: Mapping[str, Any]) -> list[tuple[str, str, Any, str]]:
    # the sheet's table of shown figures (app/web/view.py) and its display texts
    from ringwise.web.view import NOISE_SHOWN, SHOWN, STABILITY_SHOWN, lookup, shown_figures

    shown = shown_figures(result)
    labels = [(p, label) for p, _u, label, _panel in SHOWN] + [
        (p, label) for p, _u, label in STABILITY_SHOWN + NOISE_SHOWN
    ]
    return [(p, label, lookup(result, p), shown[p]["text"]) for p, label in labels if p in shown]


def cmd_analyze(args: argparse.Namespace) -> None:
    result = analyze(load_design(args.design)).model_dump(mode="json")
    if args.format == "json":
        print_json(result)
    elif args.series == "figures":
        _figures_out(_analysis_figures(result), args.format)
    else:
        _series_out(result_series(result, args.series), args.format)


def cmd_threshold(args: argparse.Namespace) -> None:
    design = load_design(args.design)
    param = args.param or gain_setter(design)
    try:
        result = find_threshold(design, param)
    except ParameterError as err:
        raise BadInputError(f"--param: {err}") from err
    record = {
        "param": result.param,
        "value": result.value,
        "current": result.current,
        "reason": result.reason,
    }
    print_json(record) if args.format == "json" else records_out([record], args.format)


def cmd_sweep(args: argparse.Namespace) -> None:
    design = load_design(args.design)
    start = _value(args.start, "--from")
    stop = _value(args.stop, "--to")
    try:
        result = sweep(design, args.param, start, stop, args.points, args.scale)
    except ParameterError as err:
        raise BadInputError(str(err)) from err
    if args.format != "json":
        _series_out(sweep_table(result), args.format)
        return
    print_json(
        {
            "param": result.param,
            "values": result.values,
            "f_osc": result.f_osc,
            "gain": result.gain,
            "threshold": {
                "param": result.threshold.param,
                "value": result.threshold.value,
                "reason": result.threshold.reason,
            },
        }
    )


def _with_progress(what: str, work: Callable[[Callable[[float], bool]], Any]) -> Any:
    report, close = progress(1.0, what)
    try:
        return work(report)
    finally:
        close()


def cmd_simulate(args: argparse.Namespace) -> None:
    design = load_design(args.design)
    try:
        result = _with_progress(
            "simulate",
            lambda report: simulate(design, args.cycles, args.points, progress=report),
        )
    except SimulationError as err:
        raise BadInputError(str(err)) from err
    data = result.model_dump(mode="json")
    if args.format == "json":
        if not args.waveforms:
            for key in ("waveform", "envelope", "spectrum"):
                data["transient"].pop(key)
        print_json(data)
    elif args.series == "figures":
        from ringwise.web.view import RUN_SHOWN, lookup, run_view

        shown = run_view(data)["shown"]
        rows = [(p, label, lookup(data, p), shown[p]["text"]) for p, _u, label in RUN_SHOWN]
        _figures_out(rows, args.format)
    else:
        _series_out(result_series(data, args.series), args.format)


def cmd_snap(args: argparse.Namespace) -> None:
    design = load_design(args.design)
    try:
        result = snap_design(design, args.series, args.keep_frequency)
    except SeriesError as err:
        raise BadInputError(f"--series: {err}") from err
    print_json(result.design.model_dump(mode="json"))
    for part, before, after in result.changes:
        print(f"ringwise: {part} {format_si(before)} → {format_si(after)}", file=sys.stderr)
    print(
        f"ringwise: f_osc {format_si(result.f_before, 'Hz')} → {format_si(result.f_after, 'Hz')}, "
        f"loop gain {result.gain_before:.3g} → {result.gain_after:.3g}",
        file=sys.stderr,
    )
    if result.trim is not None:
        print(f"ringwise: {result.trim.text}", file=sys.stderr)


def cmd_sensitivity(args: argparse.Namespace) -> None:
    rows = sensitivities(load_design(args.design))
    records_out(
        [{"part": r.part, "value": r.value, "S_f": r.S_f, "S_gain": r.S_gain} for r in rows],
        args.format,
    )


def cmd_spread(args: argparse.Namespace) -> None:
    design = load_design(args.design)
    window = None
    if args.window:
        window = (_value(args.window[0], "--window"), _value(args.window[1], "--window"))
    try:
        run = _with_progress(
            "spread",
            lambda report: monte_carlo(
                design, args.samples, args.seed, args.margin, window, progress=report
            ),
        )
    except SpreadError as err:
        raise BadInputError(str(err)) from err
    data = spread_out(design, run).model_dump(mode="json")
    if args.format == "json":
        if not args.histograms:
            for key in ("f_histogram", "gain_histogram"):
                data["spread"].pop(key)
        print_json(data)
    elif args.series == "samples":
        _series_out(samples_table(run), args.format)
    elif args.series == "temperature":
        _series_out(temperature_table(data), args.format)
    else:
        records_out([_spread_record(data["spread"])], args.format)


def _spread_record(s: Mapping[str, Any]) -> dict[str, Any]:
    record = {
        key: s[key]
        for key in ("samples", "seed", "margin", "yield_start", "yield_margin", "in_window")
    }
    for name in ("f_osc", "gain"):
        for p, v in s[name].items():
            record[f"{name}_{p}"] = v
    return record


def cmd_synthesize(args: argparse.Namespace) -> None:
    try:
        result = _with_progress(
            "synthesize",
            lambda report: synthesize(
                args.topology,
                _value(args.f, "--f"),
                _value(args.Vcc, "--Vcc"),
                _value(args.IC, "--IC"),
                gain=args.gain,
                L=_value(args.L, "--L") if args.L else None,
                ratio=args.ratio,
                Q_L=_value(args.Q_L, "--Q_L") if args.Q_L else None,
                R_load=_value(args.R_load, "--R_load") if args.R_load else None,
                preset=args.preset,
                clapp=args.clapp,
                progress=report,
            ),
        )
    except SynthesisError as err:
        raise BadInputError(str(err)) from err
    print_json(result.design.model_dump(mode="json"))
    for reason in result.reasons:
        print(f"ringwise: {reason}", file=sys.stderr)


def cmd_reconcile(args: argparse.Namespace) -> None:
    design = load_design(args.design)
    threshold = None
    if args.threshold:
        part, sep, text = args.threshold.partition("=")
        if not sep:
            raise BadInputError("--threshold: write PART=VALUE, e.g. RC=180")
        threshold = (part.strip(), _value(text, "--threshold"))
    amplitude = _value(args.amplitude, "--amplitude") if args.amplitude else None
    IC = _value(args.IC, "--IC") if args.IC else None
    f_measured = _value(args.f_measured, "--f-measured")
    try:
        r = _with_progress(
            "reconcile",
            lambda report: reconcile(design, f_measured, threshold, amplitude, IC, progress=report),
        )
    except ReconcileError as err:
        raise BadInputError(str(err)) from err
    print_json(
        {
            "fitted": [vars(f) for f in r.fitted],
            "readings": {
                k: {"bench": b, "nominal_model": n, "as_built_model": a}
                for k, (b, n, a) in r.readings.items()
            },
            "explanation": r.explanation,
            "evidence_dAIC": r.evidence,
            "as_built": r.as_built.model_dump(mode="json"),
            "tried": r.tried,
            "of": r.of,
            "stopped": r.stopped,
        }
    )


def cmd_bom(args: argparse.Namespace) -> None:
    from ringwise.bom import bill_of_materials

    document = read_json(args.design)
    lines = bill_of_materials(validate_design(document, args.design), document)
    records = [line.model_dump(mode="json") for line in lines]
    if args.format == "table":
        print_table(
            ["ref", "value", "standard", "tolerance", "dielectric", "V peak", "power", "note"],
            (line.table_row() for line in lines),
        )
    else:
        records_out(records, args.format)


def cmd_schema(_args: argparse.Namespace) -> None:
    from ringwise.schema import design_schema

    print_json(design_schema())


def cmd_serve(args: argparse.Namespace) -> None:
    from ringwise.web.server import serve  # imported here: the core needs no web stack

    target = args.design
    if target is not None and (target == "-" or target.endswith(".json") or "/" in target):
        document = read_json(target)
        validate_design(document, target)  # a bad file is refused here, in one message
        serve(host=args.host, port=args.port, document=document, allow_hosts=args.allow_host)
    else:
        serve(
            host=args.host,
            port=args.port,
            design=target or args.sample,
            allow_hosts=args.allow_host,
        )


COMMANDS: dict[str, Callable[[argparse.Namespace], None]] = {
    "analyze": cmd_analyze,
    "threshold": cmd_threshold,
    "sweep": cmd_sweep,
    "simulate": cmd_simulate,
    "snap": cmd_snap,
    "sensitivity": cmd_sensitivity,
    "spread": cmd_spread,
    "synthesize": cmd_synthesize,
    "reconcile": cmd_reconcile,
    "bom": cmd_bom,
    "schema": cmd_schema,
    "serve": cmd_serve,
}


def run(args: argparse.Namespace) -> None:
    COMMANDS[args.command](args)
