"""``ringwise`` command line.

Every command reads a design file (``-`` reads standard input) and prints the
same result models as the web API: JSON by default, ``--format table`` in
engineering units with the sheet's labels, or ``--format csv``.  Bad input
ends with one line naming the problem and exit status 2; a closed pipe
(``ringwise analyze x.json | head -1``) and Ctrl-C end quietly.

This module imports only the standard library, so ``ringwise --help``
answers at once; the numerical stack is imported when a command runs
(:mod:`ringwise.commands`).
"""

from __future__ import annotations

import argparse
import os
import signal
import sys
from typing import Final

from ringwise import __version__

EXIT_BAD_INPUT: Final = 2
#: Exit status after Ctrl-C (128 + SIGINT, the shells' convention).
EXIT_INTERRUPTED: Final = 128 + signal.SIGINT
#: TCP port numbers (RFC 793: 16 bits; 0 is not a port one can connect to).
PORT_RANGE: Final = (1, 65535)
#: Seeds numpy's generator accepts are non-negative; this many bits is plenty.
SEED_RANGE: Final = (0, 2**64 - 1)
FORMATS: Final = ("json", "table", "csv")
TOPOLOGIES: Final = ("common-emitter", "common-base", "common-collector")
SERIES_NAMES: Final = ("E6", "E12", "E24", "E48", "E96")
#: The transistor classes of ringwise.presets (written out: --help imports nothing;
#: tests/test_cli.py checks they agree).
PRESET_NAMES: Final = ("general-purpose", "high-beta-low-noise", "rf")


class BadInputError(Exception):
    """Input the user must fix; the message says what and where."""


def _bounded_int(low: int, high: int, what: str):
    def parse(text: str) -> int:
        try:
            value = int(text, 10)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text[:40]!r} is not a whole number") from None
        if not low <= value <= high:
            raise argparse.ArgumentTypeError(f"{what} must be {low} … {high}, got {value}")
        return value

    parse.__name__ = what
    return parse


def _number(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text[:40]!r} is not a number") from None
    if value != value or value in (float("inf"), float("-inf")):
        raise argparse.ArgumentTypeError(f"{text[:40]!r} is not a finite number")
    return value


def _design_argument(p: argparse.ArgumentParser) -> None:
    p.add_argument("design", help="design JSON file, or - to read it from standard input")


def _format_argument(p: argparse.ArgumentParser, series: tuple[str, ...] = ()) -> None:
    p.add_argument(
        "--format",
        choices=FORMATS,
        default="json",
        help="json (default, the API's result), table (engineering units, the sheet's labels) "
        "or csv",
    )
    if series:
        p.add_argument(
            "--series",
            choices=series,
            default=series[0],
            help=f"what --format table/csv lists (default {series[0]})",
        )


def parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="ringwise", description="Design sheet for Colpitts-family LC oscillators."
    )
    p.add_argument("--version", action="version", version=f"ringwise {__version__}")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    a = sub.add_parser("analyze", help="the full analysis of a design")
    _design_argument(a)
    _format_argument(
        a, ("figures", "phase-noise", "phase-noise-computed", "noise-sources", "tuning")
    )

    t = sub.add_parser("threshold", help="value of one part at which the loop gain is 1")
    _design_argument(t)
    t.add_argument("--param", help="part to vary (default: the gain-setting resistor)")
    _format_argument(t)

    s = sub.add_parser("sweep", help="f_osc and loop gain along one part's value")
    _design_argument(s)
    s.add_argument("--param", required=True, help="part to vary, e.g. RC, C2, L")
    s.add_argument("--from", dest="start", required=True, help="first value, e.g. 100, 2k2, 1n")
    s.add_argument("--to", dest="stop", required=True, help="last value, e.g. 2k")
    s.add_argument("--points", type=int, default=50, help="number of values (default 50)")
    s.add_argument(
        "--scale", choices=["log", "linear"], default=None, help="spacing (default: by part)"
    )
    _format_argument(s)

    m = sub.add_parser("simulate", help="nonlinear transient: amplitude, THD, startup, squegging")
    _design_argument(m)
    m.add_argument(
        "--cycles", type=_number, default=300.0, help="periods to run (default 300; capped)"
    )
    m.add_argument("--points", type=int, default=4000, help="waveform points kept (default 4000)")
    m.add_argument(
        "--waveforms", action="store_true", help="JSON: include waveform, envelope, spectrum"
    )
    _format_argument(m, ("figures", "waveform", "envelope", "spectrum"))

    n = sub.add_parser("snap", help="move every part to the nearest E-series value")
    _design_argument(n)
    n.add_argument("--series", default="E24", help=f"{', '.join(SERIES_NAMES)} (default E24)")
    n.add_argument(
        "--keep-frequency",
        action="store_true",
        help="re-trim one tank capacitor (C3, or the smaller of C1, C2) to keep f_osc",
    )

    k = sub.add_parser("sensitivity", help="∂ln f/∂ln x and ∂ln T/∂ln x for every part")
    _design_argument(k)
    _format_argument(k)

    r = sub.add_parser("spread", help="Monte Carlo over tolerances and temperature: yield")
    _design_argument(r)
    r.add_argument("--samples", type=int, default=2000, help="samples (default 2000; capped)")
    r.add_argument(
        "--seed", type=_bounded_int(*SEED_RANGE, "--seed"), default=1, help="random seed (≥ 0)"
    )
    r.add_argument(
        "--margin", type=_number, default=2.0, help="loop gain the margin yield asks for"
    )
    r.add_argument(
        "--window", nargs=2, metavar=("LOW", "HIGH"), help="frequency window, e.g. 990k 1.01M"
    )
    r.add_argument("--histograms", action="store_true", help="JSON: include the histograms")
    _format_argument(r, ("figures", "samples", "temperature"))

    y = sub.add_parser("synthesize", help="a buildable design from targets, in standard values")
    y.add_argument("--topology", choices=TOPOLOGIES, default="common-emitter", help="the form")
    y.add_argument("--f", required=True, help="target frequency, e.g. 1M")
    y.add_argument("--Vcc", required=True, help="supply, e.g. 12")
    y.add_argument("--IC", required=True, help="collector current, e.g. 1m")
    y.add_argument("--gain", type=_number, default=3.0, help="target loop gain (default 3)")
    y.add_argument("--L", default=None, help="inductor to use, e.g. 10u")
    y.add_argument("--ratio", type=_number, default=None, help="C1/C2 to use instead of tuning")
    y.add_argument("--Q_L", default=None, help="the coil's Q to keep (default: a typical 80)")
    y.add_argument("--R_load", default=None, help="the load to keep, e.g. 10k (default none)")
    y.add_argument(
        "--preset",
        default="general-purpose",
        choices=PRESET_NAMES,
        help="transistor class (default general-purpose)",
    )
    y.add_argument("--clapp", action="store_true", help="the Clapp form (C3 in series with L)")

    c = sub.add_parser("reconcile", help="fit the model to what the bench showed")
    _design_argument(c)
    c.add_argument("--f-measured", required=True, help="measured frequency, e.g. 1.012M")
    c.add_argument("--threshold", help="part value at which it started, e.g. RC=180")
    c.add_argument("--amplitude", help="measured amplitude at the output node, V")
    c.add_argument("--IC", help="measured collector current, e.g. 1.2m")

    b = sub.add_parser("bom", help="bill of materials: values, standard series, stresses")
    _design_argument(b)
    b.add_argument(
        "--format", choices=FORMATS, default="table", help="table (default), csv or json"
    )

    h = sub.add_parser("schema", help="the JSON Schema of design files")
    h.set_defaults(design=None)

    v = sub.add_parser("serve", help="serve the design sheet on this computer")
    v.add_argument(
        "design",
        nargs="?",
        default=None,
        help="design file to open, or a sample's name (default: a sample)",
    )
    v.add_argument("--host", default="127.0.0.1", help="address to bind (default 127.0.0.1)")
    v.add_argument(
        "--port", type=_bounded_int(*PORT_RANGE, "--port"), default=8000, help="default 8000"
    )
    v.add_argument("--design", dest="sample", default=None, help="sample design to open with")
    v.add_argument(
        "--allow-host",
        action="append",
        default=[],
        metavar="NAME",
        help="a host name the sheet may be opened under besides 127.0.0.1, localhost and "
        "[::1] (repeatable; e.g. this computer's name on your network)",
    )
    return p


def _quiet_broken_pipe() -> None:
    """Standard output was closed early (``| head``): leave without a traceback.

    Python flushes stdout at exit and would report the broken pipe again;
    pointing stdout at /dev/null first keeps that silent.
    """
    devnull = os.open(os.devnull, os.O_WRONLY)
    os.dup2(devnull, sys.stdout.fileno())


def main(argv: list[str] | None = None) -> int:
    args = parser().parse_args(argv)
    try:
        from ringwise.commands import run  # the numerical stack, only now

        run(args)
        sys.stdout.flush()
    except BadInputError as err:
        from ringwise.console import clip_message

        print(f"ringwise: {clip_message(str(err))}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except BrokenPipeError:
        _quiet_broken_pipe()
        return 0
    except KeyboardInterrupt:
        print("", file=sys.stderr)
        return EXIT_INTERRUPTED
    return 0


if __name__ == "__main__":  # pragma: no cover
    # python -m ringwise.cli: run the imported module, so that ringwise.commands
    # raises the same BadInputError class that main catches
    from ringwise.cli import main as _main

    sys.exit(_main())
