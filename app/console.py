"""The command line's edges: reading a design file, printing JSON/table/CSV, progress.

Reading is bounded: at most :data:`MAX_DESIGN_BYTES` are read (so ``/dev/zero``
or a runaway pipe is refused, not swallowed), the text must be UTF-8 (a
byte-order mark is accepted and dropped, as the web API does), and JSON
nested too deeply or holding a number too long to convert is refused with a
one-line message.  Echoed input is clipped to :data:`MAX_ECHO` characters.
"""

from __future__ import annotations

import io
import json
import sys
from collections.abc import Callable, Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any, Final

from ringwise.cli import BadInputError

#: Largest design file read, bytes: the web server's request body cap
#: (MAX_BODY_BYTES in app/web/server.py); a design file is 1-2 kB.
MAX_DESIGN_BYTES: Final = 64 * 1024
#: Longest piece of the user's input echoed in a message, characters.
MAX_ECHO: Final = 80
#: Longest line of a message, characters (a problem list has one per field).
MAX_LINE: Final = 300
#: Most problem lines printed for one file.
MAX_PROBLEMS: Final = 12
STDIN: Final = "-"
#: The progress bar: what runs, percent done, the bar, time spent and left.
BAR_FORMAT: Final = "{desc}: {percentage:3.0f}% |{bar}| {elapsed} < {remaining}"


def clip(text: str, limit: int = MAX_ECHO) -> str:
    """``text`` cut to ``limit`` characters, marked with an ellipsis when cut."""
    return text if len(text) <= limit else text[: limit - 1] + "…"


def clip_message(message: str) -> str:
    """Every line of a message cut to :data:`MAX_LINE`, at most MAX_PROBLEMS + 1 lines."""
    lines = message.splitlines() or [""]
    kept = [clip(line, MAX_LINE) for line in lines[: MAX_PROBLEMS + 1]]
    if len(lines) > MAX_PROBLEMS + 1:
        kept.append(f"  … and {len(lines) - MAX_PROBLEMS - 1} more")
    return "\n".join(kept)


def _shown(path: str) -> str:
    return "standard input" if path == STDIN else clip(path)


def read_text(path: str) -> str:
    """The text of a design file (``-``: standard input), bounded and decoded."""
    where = _shown(path)
    try:
        if path == STDIN:
            data = sys.stdin.buffer.read(MAX_DESIGN_BYTES + 1)
        else:
            with Path(path).open("rb") as f:
                data = f.read(MAX_DESIGN_BYTES + 1)
    except OSError as err:
        raise BadInputError(f"cannot read {where}: {err.strerror}") from err
    if len(data) > MAX_DESIGN_BYTES:
        raise BadInputError(
            f"{where} is over {MAX_DESIGN_BYTES} bytes; a design file is a few kilobytes"
        )
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        raise BadInputError(
            f"{where} is not UTF-8 text (byte 0x{data[err.start]:02x} at offset {err.start})"
        ) from err


def read_json(path: str) -> Any:
    """A design file's JSON, with every way it can fail as one line."""
    text = read_text(path)
    where = _shown(path)
    try:
        return json.loads(text)
    except json.JSONDecodeError as err:
        raise BadInputError(
            f"{where} is not JSON: {err.msg} at line {err.lineno} column {err.colno}"
        ) from err
    except RecursionError as err:
        raise BadInputError(f"{where} is not a design file: its JSON is nested too deeply") from err
    except ValueError as err:  # e.g. an integer of thousands of digits
        raise BadInputError(f"{where} is not a design file: {clip(str(err), MAX_LINE)}") from err


def load_design(path: str):
    """The :class:`~ringwise.design.Design` in a file, or a message naming each bad field."""
    return validate_design(read_json(path), path)


def validate_design(data: Any, path: str):
    """The :class:`~ringwise.design.Design` of a file's JSON ``data``."""
    from pydantic import ValidationError

    from ringwise.design import Design
    from ringwise.errors import describe_validation_error

    try:
        return Design.model_validate(data)
    except ValidationError as err:
        problems = describe_validation_error(err)
        lines = [f"{clip(p['field'])}: {p['message']}" for p in problems]
        raise BadInputError(
            f"{_shown(path)} is not a valid design:\n  " + "\n  ".join(lines)
        ) from err
    except (RecursionError, OverflowError, ArithmeticError) as err:
        raise BadInputError(f"{_shown(path)} is not a valid design: {clip(str(err))}") from err


# --- output -----------------------------------------------------------------------


def print_json(data: Any) -> None:
    json.dump(data, sys.stdout, indent=2, ensure_ascii=False, allow_nan=False)
    sys.stdout.write("\n")


def print_csv(header: Sequence[str], rows: Iterable[Sequence[Any]]) -> None:
    from ringwise.exports import csv_text

    sys.stdout.write(csv_text(header, rows))


def print_table(header: Sequence[str], rows: Iterable[Sequence[str]]) -> None:
    """Columns padded to their widest cell; numbers are already engineering text."""
    body = [list(map(str, r)) for r in rows]
    widths = [
        max(len(h), *(len(r[i]) for r in body)) if body else len(h) for i, h in enumerate(header)
    ]
    out = io.StringIO()
    out.write("  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True)).rstrip() + "\n")
    out.write("  ".join("-" * w for w in widths) + "\n")
    for r in body:
        out.write("  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip() + "\n")
    sys.stdout.write(out.getvalue())


def records_out(records: Sequence[Mapping[str, Any]], fmt: str) -> None:
    """A list of flat records as JSON, a table or CSV (keys as the header)."""
    if fmt == "json":
        print_json(list(records))
        return
    header = list(records[0]) if records else []
    if fmt == "csv":
        print_csv(header, ([r[k] for k in header] for r in records))
    else:
        print_table(header, ([_cell(r[k]) for k in header] for r in records))


def _cell(value: Any) -> str:
    if value is None:
        return "—"
    if isinstance(value, float):
        return f"{value:.4g}"
    return str(value)


# --- progress ---------------------------------------------------------------------


def progress(total: float, what: str) -> tuple[Callable[[float], bool], Callable[[], None]]:
    """A progress callback (fraction 0 … 1 → keep going) and a closer.

    A bar is drawn on standard error only when it is a terminal (tqdm);
    otherwise the callback does nothing, so pipes and logs stay clean.
    """
    if not sys.stderr.isatty():
        return (lambda _fraction: True), (lambda: None)
    from tqdm import tqdm

    bar = tqdm(total=total, desc=what, file=sys.stderr, leave=False, bar_format=BAR_FORMAT)

    def report(fraction: float) -> bool:
        bar.update(max(0.0, fraction * total - bar.n))
        return True

    return report, bar.close
