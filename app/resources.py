"""Files shipped with the package: templates, static files, sample designs.

The checkout keeps ``templates/``, ``static/`` and ``sample_designs/`` at the
top; the build maps each to a subpackage of ``ringwise`` (``package-dir`` in
``pyproject.toml``), so an editable install and an installed wheel both find
them with :mod:`importlib.resources`, never from the working folder.
"""

from __future__ import annotations

from functools import cache
from importlib.resources import files
from pathlib import Path
from typing import Final

TEMPLATES: Final = "ringwise.templates"
STATIC: Final = "ringwise.static"
SAMPLES: Final = "ringwise.sample_designs"


@cache
def folder(package: str) -> Path:
    """The folder of a data subpackage on disk (Jinja2 and Starlette need a real folder)."""
    found = files(package)
    if not isinstance(found, Path):  # pragma: no cover - only a zip import gets here
        raise RuntimeError(f"{package} is not installed as a folder: {found}")
    return found


def sample_files() -> list[Path]:
    """Every sample design file, in name order."""
    return sorted(folder(SAMPLES).glob("*.json"))
