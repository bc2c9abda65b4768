"""What the fork server holds before it forks a worker (``workers.PRELOAD``).

The package imported, and the compiled kernels (``analysis/crossing.py``,
``circuit/smalllu.py``, the DC Newton) loaded from their on-disk cache by one
small-signal analysis of a sample, so that every worker forked from it
starts with them in memory instead of loading them on its first piece of
work; then the collector's view of all this is frozen (``gc.freeze``), so
no worker's full collection walks it.
"""

from __future__ import annotations

import contextlib
import gc

import ringwise.web.server  # noqa: F401  (the whole package, as the workers use it)
from ringwise.analysis.analyze import analyze
from ringwise.design import Design
from ringwise.web.samples import samples

#: The sample analysed once in the fork server.
PRELOAD_SAMPLE = "clapp-clock-1M"

with contextlib.suppress(Exception):
    analyze(Design.model_validate(samples()[PRELOAD_SAMPLE].document), large_signal=False)
gc.freeze()
