"""``ringwise`` command line: analyze, threshold, sweep, serve.

Every command reads a design file and prints JSON in the same contract as the
web API.  Bad input exits with status 2 and a message naming the field.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from ringwise import __version__
from ringwise.analysis.analyze import analyze
from ringwise.analysis.reconcile import ReconcileError, reconcile
from ringwise.analysis.sensitivity import sensitivities
from ringwise.analysis.spread import SpreadError, spread_result
from ringwise.analysis.synthesis import SynthesisError, synthesize
from ringwise.analysis.threshold import ParameterError, find_threshold, sweep
from ringwise.analysis.transient import MAX_CYCLES, SimulationError, simulate
from ringwise.circuit.topologies import GAIN_SETTER
from ringwise.design import Design, Topology
from ringwise.errors import describe_validation_error
from ringwise.preferred import SeriesError, snap_design
from ringwise.units import UnitError, format_si, parse_quantity

EXIT_BAD_INPUT = 2


class BadInputError(Exception):
    """Input the user must fix; the message says what and where."""


def _load(path: str) -> Design:
    try:
        text = Path(path).read_text(encoding="utf-8")
    except OSError as err:
        raise BadInputError(f"cannot read {path}: {err.strerror}") from err
    try:
        data = json.loads(text)
    except json.JSONDecodeError as err:
        raise BadInputError(f"{path} is not JSON: {err.msg} at line {err.lineno}") from err
    try:
        return Design.model_validate(data)
    except ValidationError as err:
        lines = [f"{item['field']}: {item['message']}" for item in describe_validation_error(err)]
        raise BadInputError(f"{path} is not a valid design:\n  " + "\n  ".join(lines)) from err


def _value(text: str, what: str) -> float:
    try:
        return parse_quantity(text)
    except UnitError as err:
        raise BadInputError(f"{what}: {err}") from err


def _print(data: Any) -> None:
    json.dump(data, sys.stdout, indent=2, ensure_ascii=False, allow_nan=False)
    sys.stdout.write("\n")


def cmd_analyze(args: argparse.Namespace) -> None:
    _print(analyze(_load(args.design)).model_dump(mode="json"))


def cmd_threshold(args: argparse.Namespace) -> None:
    design = _load(args.design)
    param = args.param or GAIN_SETTER[design.topology]
    try:
        result = find_threshold(design, param)
    except ParameterError as err:
        raise BadInputError(f"--param: {err}") from err
    _print(
        {
            "param": result.param,
            "value": result.value,
            "current": result.current,
            "reason": result.reason,
        }
    )


def cmd_sweep(args: argparse.Namespace) -> None:
    design = _load(args.design)
    start = _value(args.start, "--from")
    stop = _value(args.stop, "--to")
    try:
        result = sweep(design, args.param, start, stop, args.points, args.scale)
    except ParameterError as err:
        raise BadInputError(str(err)) from err
    _print(
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


def cmd_simulate(args: argparse.Namespace) -> None:
    design = _load(args.design)
    try:
        result = simulate(design, cycles=args.cycles, points=args.points)
    except SimulationError as err:
        raise BadInputError(str(err)) from err
    data = result.model_dump(mode="json")
    if not args.waveforms:
        for key in ("waveform", "envelope", "spectrum"):
            data["transient"].pop(key)
    _print(data)


def cmd_snap(args: argparse.Namespace) -> None:
    design = _load(args.design)
    try:
        result = snap_design(design, args.series)
    except SeriesError as err:
        raise BadInputError(f"--series: {err}") from err
    _print(result.design.model_dump(mode="json"))
    for part, before, after in result.changes:
        print(f"ringwise: {part} {format_si(before)} → {format_si(after)}", file=sys.stderr)
    print(
        f"ringwise: f_osc {format_si(result.f_before, 'Hz')} → {format_si(result.f_after, 'Hz')}, "
        f"loop gain {result.gain_before:.3g} → {result.gain_after:.3g}",
        file=sys.stderr,
    )


def cmd_sensitivity(args: argparse.Namespace) -> None:
    rows = sensitivities(_load(args.design))
    _print([{"part": r.part, "value": r.value, "S_f": r.S_f, "S_gain": r.S_gain} for r in rows])


def cmd_spread(args: argparse.Namespace) -> None:
    design = _load(args.design)
    window = None
    if args.window:
        window = (_value(args.window[0], "--window"), _value(args.window[1], "--window"))
    try:
        result = spread_result(design, args.samples, args.seed, args.margin, window)
    except SpreadError as err:
        raise BadInputError(str(err)) from err
    data = result.model_dump(mode="json")
    if not args.histograms:
        for key in ("f_histogram", "gain_histogram"):
            data["spread"].pop(key)
    _print(data)


def cmd_synthesize(args: argparse.Namespace) -> None:
    try:
        result = synthesize(
            args.topology,
            _value(args.f, "--f"),
            _value(args.Vcc, "--Vcc"),
            _value(args.IC, "--IC"),
            gain=args.gain,
            L=_value(args.L, "--L") if args.L else None,
            ratio=args.ratio,
        )
    except SynthesisError as err:
        raise BadInputError(str(err)) from err
    _print(result.design.model_dump(mode="json"))
    for reason in result.reasons:
        print(f"ringwise: {reason}", file=sys.stderr)


def cmd_reconcile(args: argparse.Namespace) -> None:
    design = _load(args.design)
    threshold = None
    if args.threshold:
        part, sep, text = args.threshold.partition("=")
        if not sep:
            raise BadInputError("--threshold: write PART=VALUE, e.g. RC=180")
        threshold = (part.strip(), _value(text, "--threshold"))
    amplitude = _value(args.amplitude, "--amplitude") if args.amplitude else None
    try:
        r = reconcile(design, _value(args.f_measured, "--f-measured"), threshold, amplitude)
    except ReconcileError as err:
        raise BadInputError(str(err)) from err
    _print(
        {
            "fitted": [vars(f) for f in r.fitted],
            "readings": {
                k: {"bench": b, "nominal_model": n, "as_built_model": a}
                for k, (b, n, a) in r.readings.items()
            },
            "explanation": r.explanation,
            "evidence_dAIC": r.evidence,
            "as_built": r.as_built.model_dump(mode="json"),
        }
    )


def cmd_serve(args: argparse.Namespace) -> None:
    from ringwise.web.server import serve  # imported here: the core needs no web stack

    serve(host=args.host, port=args.port, design=args.design)


def parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="ringwise", description="Design sheet for Colpitts-family LC oscillators."
    )
    p.add_argument("--version", action="version", version=f"ringwise {__version__}")
    sub = p.add_subparsers(dest="command", required=True)

    a = sub.add_parser("analyze", help="print the full analysis of a design as JSON")
    a.add_argument("design", help="design JSON file")
    a.set_defaults(run=cmd_analyze)

    t = sub.add_parser("threshold", help="value of one part at which the loop gain is 1")
    t.add_argument("design")
    t.add_argument("--param", help="part to vary (default: the gain-setting resistor)")
    t.set_defaults(run=cmd_threshold)

    s = sub.add_parser("sweep", help="f_osc and loop gain along one part's value")
    s.add_argument("design")
    s.add_argument("--param", required=True)
    s.add_argument("--from", dest="start", required=True, help="e.g. 100, 2k2, 1n")
    s.add_argument("--to", dest="stop", required=True)
    s.add_argument("--points", type=int, default=50)
    s.add_argument("--scale", choices=["log", "linear"], default=None)
    s.set_defaults(run=cmd_sweep)

    m = sub.add_parser("simulate", help="nonlinear transient: amplitude, THD, startup, squegging")
    m.add_argument("design")
    m.add_argument("--cycles", type=float, default=300.0, help=f"periods to run (max {MAX_CYCLES})")
    m.add_argument("--points", type=int, default=4000, help="waveform points kept")
    m.add_argument("--waveforms", action="store_true", help="include waveform, envelope, spectrum")
    m.set_defaults(run=cmd_simulate)

    n = sub.add_parser("snap", help="move every part to the nearest E-series value")
    n.add_argument("design")
    n.add_argument("--series", default="E24", help="E6, E12, E24, E48 or E96 (default E24)")
    n.set_defaults(run=cmd_snap)

    k = sub.add_parser("sensitivity", help="∂ln f/∂ln x and ∂ln T/∂ln x for every part")
    k.add_argument("design")
    k.set_defaults(run=cmd_sensitivity)

    p_ = sub.add_parser("spread", help="Monte Carlo over tolerances and temperature: yield")
    p_.add_argument("design")
    p_.add_argument("--samples", type=int, default=2000, help="samples (max 100000)")
    p_.add_argument("--seed", type=int, default=1)
    p_.add_argument("--margin", type=float, default=2.0, help="loop gain the margin yield asks for")
    p_.add_argument(
        "--window", nargs=2, metavar=("LOW", "HIGH"), help="frequency window, e.g. 990k 1.01M"
    )
    p_.add_argument("--histograms", action="store_true", help="include the histograms")
    p_.set_defaults(run=cmd_spread)

    y = sub.add_parser("synthesize", help="a buildable design from targets, in standard values")
    y.add_argument("--topology", choices=[t.value for t in Topology], default="common-emitter")
    y.add_argument("--f", required=True, help="target frequency, e.g. 1M")
    y.add_argument("--Vcc", required=True, help="supply, e.g. 12")
    y.add_argument("--IC", required=True, help="collector current, e.g. 1m")
    y.add_argument("--gain", type=float, default=3.0, help="target loop gain (default 3)")
    y.add_argument("--L", default=None, help="inductor to use, e.g. 10u")
    y.add_argument("--ratio", type=float, default=None, help="C1/C2 to use instead of tuning")
    y.set_defaults(run=cmd_synthesize)

    c = sub.add_parser("reconcile", help="fit the model to what the bench showed")
    c.add_argument("design")
    c.add_argument("--f-measured", required=True, help="measured frequency, e.g. 1.012M")
    c.add_argument("--threshold", help="part value at which it started, e.g. RC=180")
    c.add_argument("--amplitude", help="measured amplitude at the output node, V")
    c.set_defaults(run=cmd_reconcile)

    v = sub.add_parser("serve", help="serve the design sheet on this computer")
    v.add_argument("--host", default="127.0.0.1", help="address to bind (default 127.0.0.1)")
    v.add_argument("--port", type=int, default=8000)
    v.add_argument("--design", default=None, help="sample design to open with")
    v.set_defaults(run=cmd_serve)
    return p


def main(argv: list[str] | None = None) -> int:
    args = parser().parse_args(argv)
    try:
        args.run(args)
    except BadInputError as err:
        print(f"ringwise: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
