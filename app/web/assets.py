"""Static files with content hashes in their URLs, and plotly.js from the plotly package.

Every asset is served by the app itself, so the sheet works with the network
unplugged.  URLs carry a short content hash (``/static/sheet.js?v=1a2b3c4d``)
so a browser never runs a stale copy; hashed URLs may be cached for a year.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass
from functools import cache
from importlib.util import find_spec
from pathlib import Path
from typing import Final

from ringwise.web.paths import STATIC_DIR

#: Characters of the SHA-256 hex digest used in URLs (collisions are harmless here).
HASH_CHARS: Final = 10
#: Cache lifetime of a hashed URL, s (one year, common practice, no source).
IMMUTABLE_MAX_AGE: Final = 365 * 24 * 3600


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()[:HASH_CHARS]


@cache
def static_url(name: str) -> str:
    """URL of a file in ``static/`` with its content hash."""
    return f"/static/{name}?v={_digest(STATIC_DIR / name)}"


@dataclass(frozen=True)
class Vendored:
    """A third-party file shipped inside an installed Python package."""

    path: Path
    version: str
    digest: str

    @property
    def url(self) -> str:
        return f"/vendor/plotly-{self.version}-{self.digest}.min.js"


@cache
def plotly_js() -> Vendored:
    """plotly.min.js from the installed ``plotly`` package, with its version and hash."""
    spec = find_spec("plotly")
    if spec is None or spec.origin is None:  # pragma: no cover - plotly is a dependency
        raise RuntimeError("the plotly package is not installed")
    path = Path(spec.origin).parent / "package_data" / "plotly.min.js"
    head = path.read_bytes()[:400].decode("ascii", errors="replace")
    match = re.search(r"plotly\.js v(\d+\.\d+\.\d+)", head)
    version = match.group(1) if match else "unknown"
    return Vendored(path, version, _digest(path))
