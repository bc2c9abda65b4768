"""Results as readable tables in a notebook (Jupyter calls ``_repr_html_``).

Every scalar of a result model is one row: its dotted path, its value in
engineering units (the unit read from the field's description, e.g.
"Oscillation frequency, Hz"), and the description.  Curves (long lists) show
their length; they are exported with :mod:`ringwise.exports`.
"""

from __future__ import annotations

import html
from collections.abc import Iterator
from typing import Any, Final

from pydantic import BaseModel

from ringwise.units import format_si

#: Lists longer than this are curves: one row saying how many points.
SHORT_LIST: Final = 8
#: Units format_si renders with a prefix; anything else is printed as a plain number.
SI_UNITS: Final = ("Hz", "V", "A", "W", "Ω", "F", "H", "s", "S")


def _unit(model: type[BaseModel], name: str) -> str:
    description = model.model_fields[name].description or ""
    unit = description.rsplit(",", 1)[-1].strip() if "," in description else ""
    return unit if unit in SI_UNITS else ""


def _rows(value: Any, path: str, unit: str, note: str) -> Iterator[tuple[str, str, str]]:
    if isinstance(value, BaseModel):
        for name in type(value).model_fields:
            field = type(value).model_fields[name]
            yield from _rows(
                getattr(value, name),
                f"{path}.{name}" if path else name,
                _unit(type(value), name),
                field.description or "",
            )
    elif isinstance(value, list) and len(value) > SHORT_LIST:
        yield path, f"{len(value)} points", note
    elif isinstance(value, list):
        for i, item in enumerate(value):
            yield from _rows(item, f"{path}.{i}", unit, note)
    elif isinstance(value, dict):
        for key, item in value.items():
            yield from _rows(item, f"{path}.{key}", unit, note)
    elif isinstance(value, float) and unit:
        yield path, format_si(value, unit), note
    elif isinstance(value, float):
        yield path, f"{value:.4g}", note
    else:
        yield path, "—" if value is None else str(value), note


def html_table(model: BaseModel) -> str:
    """An HTML table of every scalar in ``model`` (text escaped)."""
    body = "".join(
        f"<tr><td><code>{html.escape(p)}</code></td><td>{html.escape(v)}</td>"
        f"<td>{html.escape(n)}</td></tr>"
        for p, v, n in _rows(model, "", "", "")
    )
    title = html.escape(type(model).__name__)
    return (
        f"<table><caption>{title}</caption>"
        "<thead><tr><th>figure</th><th>value</th><th>meaning</th></tr></thead>"
        f"<tbody>{body}</tbody></table>"
    )
