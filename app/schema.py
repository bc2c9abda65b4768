"""The JSON Schema of a design file (``ringwise schema``).

Built from the pydantic model, then made to say what the loader accepts: a
value is a JSON number or a text with an SI prefix or RKM code (``"22k"``,
``"2n2"``, ``"4R7"``, ``"10 µH"``), so every field whose number is parsed
from text (the quantities) gets a string alternative, and pydantic's own
bound names become JSON Schema's (``minimum``/``maximum``).  The bounds of a
text value are checked by the loader, not by the schema.
"""

from __future__ import annotations

from typing import Any, Final

from ringwise.design import Design

DIALECT: Final = "https://json-schema.org/draft/2020-12/schema"
#: pydantic's names of the bounds it cannot fold into a schema (behind a
#: BeforeValidator, as on every quantity), and JSON Schema's names.
BOUNDS: Final = {
    "ge": "minimum",
    "le": "maximum",
    "gt": "exclusiveMinimum",
    "lt": "exclusiveMaximum",
}
QUANTITY_TEXT: Final = {
    "type": "string",
    "minLength": 1,
    "description": "a number with an SI prefix or an RKM code, e.g. 22k, 2n2, 4R7, 10 µH",
}


def _open_quantities(node: Any) -> Any:
    """A copy of ``node`` where each quantity (a number schema with pydantic's bound
    names) also accepts text."""
    if isinstance(node, list):
        return [_open_quantities(v) for v in node]
    if not isinstance(node, dict):
        return node
    out = {k: _open_quantities(v) for k, v in node.items()}
    if out.get("type") == "number" and any(k in out for k in BOUNDS):
        number = {k: v for k, v in out.items() if k not in ("title", "description", "default")}
        for ours, standard in BOUNDS.items():
            if ours in number:
                number[standard] = number.pop(ours)
        kept = {k: out[k] for k in ("title", "description", "default") if k in out}
        return {**kept, "anyOf": [number, QUANTITY_TEXT]}
    return out


def design_schema() -> dict[str, Any]:
    """The design file's JSON Schema (draft 2020-12)."""
    schema = _open_quantities(Design.model_json_schema(mode="validation"))
    return {
        "$schema": DIALECT,
        "title": "ringwise design file",
        **{k: v for k, v in schema.items() if k != "title"},
    }
