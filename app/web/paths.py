"""Folders the web layer reads, resolved from this package (never the working folder)."""

from __future__ import annotations

from pathlib import Path
from typing import Final

#: The project root: app/web/paths.py -> app/web -> app -> root.
ROOT: Final = Path(__file__).resolve().parents[2]
TEMPLATES_DIR: Final = ROOT / "templates"
STATIC_DIR: Final = ROOT / "static"
SAMPLES_DIR: Final = ROOT / "sample_designs"
