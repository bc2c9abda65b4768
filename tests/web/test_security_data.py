"""No data lost: files and links round-trip exactly, and a version-1 file keeps loading.

``data/design-v1.json`` is a frozen copy of a version-1 design file (written
from the 1 MHz Clapp sample when the format was at version 1).  It must never
be edited: when the format evolves, the versioned loader must still read it.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path
from urllib.parse import urlencode

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ringwise.design import Design, load_design
from ringwise.web.fields import FIELDS
from ringwise.web.paths import SAMPLES_DIR

FROZEN_V1 = Path(__file__).parent / "data" / "design-v1.json"
JSON = {"content-type": "application/json"}
#: SHA-256 of the frozen file as committed.
FROZEN_V1_SHA256 = "4bc451d9293a1021cb15978d03a68da908f8697baca2c5321890d5ac62041e53"
SAMPLE_KEYS = sorted(p.stem for p in SAMPLES_DIR.glob("*.json"))


def _doc(key: str) -> dict:
    return json.loads((SAMPLES_DIR / f"{key}.json").read_text(encoding="utf-8"))


def _export_import_export(client, doc: dict) -> tuple[bytes, bytes, str, str]:
    first = client.post("/api/import", json=doc).json()
    exported = client.get(f"/api/export?{first['query']}")
    assert exported.status_code == 200
    again = client.post("/api/import", content=exported.content, headers=JSON).json()
    exported_again = client.get(f"/api/export?{again['query']}")
    return exported.content, exported_again.content, first["query"], again["query"]


@pytest.mark.parametrize("key", SAMPLE_KEYS)
def test_export_import_export_is_byte_identical(client, key):
    a, b, qa, qb = _export_import_export(client, _doc(key))
    assert a == b
    assert qa == qb


@pytest.mark.parametrize("key", SAMPLE_KEYS)
def test_share_link_to_design_to_share_link_is_identical(client, key):
    query = client.post("/api/import", json=_doc(key)).json()["query"]
    view = client.get(f"/sheet.json?{query}").json()
    assert view["query"] == query
    assert view["link_problems"] == []
    doc = client.get(f"/api/export?{query}").json()
    assert client.post("/api/import", json=doc).json()["query"] == query


_typed = st.text(
    alphabet=st.characters(codec="utf-8", exclude_categories=["Cs", "Cc"])
    | st.sampled_from("&=#%+?/ ;\"'<>µΩ"),
    min_size=1,
    max_size=10,
).filter(lambda t: t.strip() != "")


@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(texts=st.dictionaries(st.sampled_from([f.name for f in FIELDS]), _typed, max_size=6))
def test_any_typed_texts_survive_the_share_link(client, texts):
    query = urlencode([(f.name, texts[f.name]) for f in FIELDS if f.name in texts])
    view = client.get(f"/sheet.json?{query}").json()
    assert {k: view["fields"][k]["text"] for k in texts} == texts
    if texts:
        assert view["query"] == query


def test_a_frozen_version_1_file_keeps_loading(client):
    raw = FROZEN_V1.read_bytes()
    doc = json.loads(raw)
    assert doc["version"] == 1
    design = load_design(doc)
    assert isinstance(design, Design)
    # what the file says is what is read (SI values from its own texts)
    assert pytest.approx(100e-6) == design.tank.L
    assert pytest.approx(330e-12) == design.tank.C3
    assert pytest.approx(6.8e3) == design.bias.RB2
    assert pytest.approx(10e3) == design.noise.f_corner
    assert client.post("/api/analyze", json=doc).status_code == 200
    imported = client.post("/api/import", content=raw, headers=JSON)
    assert imported.status_code == 200
    assert imported.json()["fields"]["name"] == doc["name"]
    a, b, _, _ = _export_import_export(client, doc)
    assert a == b
    assert load_design(json.loads(a)) == design


def test_the_frozen_file_is_untouched():
    # the frozen file is data of record: a change to it hides a break of the format
    doc = json.loads(FROZEN_V1.read_text(encoding="utf-8"))
    assert doc["name"] == "Frozen version-1 file (from the 1 MHz Clapp sample)"
    assert hashlib.sha256(FROZEN_V1.read_bytes()).hexdigest() == FROZEN_V1_SHA256


def test_a_file_with_tolerances_imports_without_loss(client):
    doc = _doc("clapp-clock-1M")
    doc["tolerances"] = {"R": 0.05, "T_min": -20, "T_max": 70}
    assert client.post("/api/analyze", json=doc).status_code == 200  # valid for the core
    r = client.post("/api/import", json=doc)
    assert r.status_code == 200
    exported = client.get(f"/api/export?{r.json()['query']}").json()
    assert exported["tolerances"]["R"] == 0.05
