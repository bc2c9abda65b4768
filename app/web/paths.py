"""Folders the web layer reads, from the installed package (never the working folder)."""

from __future__ import annotations

from typing import Final

from ringwise.resources import SAMPLES, STATIC, TEMPLATES, folder

TEMPLATES_DIR: Final = folder(TEMPLATES)
STATIC_DIR: Final = folder(STATIC)
SAMPLES_DIR: Final = folder(SAMPLES)
