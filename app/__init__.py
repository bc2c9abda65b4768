"""ringwise: a design sheet for discrete transistor LC oscillators of the Colpitts family.

The public API (:mod:`ringwise.api`) is importable from here; the numerical
stack is imported on first use, so ``import ringwise`` and ``ringwise --help``
stay quick::

    import ringwise

    design = ringwise.load("sample_designs/clapp-clock-1M.json")
    result = ringwise.analyze(design)
    print(result.loop.f_osc, result.loop.gain)
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

__version__ = "0.1.0"

#: Names re-exported from ringwise.api, imported when first used.
_API = ("load", "analyze", "steady_state", "spread", "simulate", "bill_of_materials")
__all__ = ["__version__", *_API]

if TYPE_CHECKING:  # pragma: no cover
    from ringwise.api import (  # noqa: F401
        analyze,
        bill_of_materials,
        load,
        simulate,
        spread,
        steady_state,
    )


def __getattr__(name: str) -> Any:
    if name in _API:
        from ringwise import api

        return getattr(api, name)
    raise AttributeError(f"module 'ringwise' has no attribute {name!r}")
