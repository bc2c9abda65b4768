"""The sample designs, looked up by name from a fixed list (never by path).

The list is read once from the package data ``ringwise.sample_designs``; a request names a sample by
its key (the file's stem) and gets it only if the key is in the list.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from functools import cache
from typing import Any

from ringwise.resources import sample_files
from ringwise.web.fields import texts_from_document


@dataclass(frozen=True)
class Sample:
    key: str
    title: str
    topology: str
    document: dict[str, Any]

    @property
    def texts(self) -> dict[str, str]:
        return texts_from_document(self.document)


@cache
def samples() -> dict[str, Sample]:
    """Every sample design, by key, in name order."""
    found = {}
    for path in sample_files():
        doc = json.loads(path.read_text(encoding="utf-8"))
        found[path.stem] = Sample(path.stem, doc.get("name", path.stem), doc["topology"], doc)
    return found


def sample_texts() -> dict[str, dict[str, str]]:
    return {key: s.texts for key, s in samples().items()}


#: The key under which a design file given to ``ringwise serve FILE`` opens.
OPENED_DESIGN = "opened-file"

#: The sample the sheet opens on when none is named.
DEFAULT_SAMPLE = "clapp-clock-1M"
