"""The JSON API (app/web/routers/api.py): every endpoint, good and bad input, never 500."""

from __future__ import annotations

import json
import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ringwise.analysis.analyze import analyze
from ringwise.analysis.threshold import MAX_SWEEP_POINTS
from ringwise.design import Design
from ringwise.web.fields import FIELDS
from ringwise.web.paths import SAMPLES_DIR
from tests.conftest import all_finite

SAMPLE_KEYS = sorted(p.stem for p in SAMPLES_DIR.glob("*.json"))


@pytest.mark.parametrize("key", SAMPLE_KEYS)
def test_analyze_returns_the_core_result(client, key):
    doc = json.loads((SAMPLES_DIR / f"{key}.json").read_text(encoding="utf-8"))
    r = client.post("/api/analyze", json=doc)
    assert r.status_code == 200
    assert r.json() == analyze(Design.model_validate(doc)).model_dump(mode="json")


@pytest.mark.parametrize(
    ("section", "field", "value", "message"),
    [
        ("tank", "L", "47uF", "'47uF' carries the unit 'F', this field takes 'H'"),
        ("tank", "C2", "abc", "'abc' is not a number; write e.g. 2.2n, 2n2, 39k or 1e-6"),
        ("bias", "RB2", 0, "must be at least 1 mΩ, got 0 Ω"),
        ("supply", "Vcc", "2k", "must be at most 1 kV, got '2k' = 2 kV"),
        ("tank", "bogus", 1, "is not a field of the design format"),
    ],
)
def test_analyze_names_the_bad_field(client, sample, section, field, value, message):
    sample[section][field] = value
    r = client.post("/api/analyze", json=sample)
    assert r.status_code == 422
    assert r.json()["problems"] == [
        {"field": f"{section}.{field}", "message": message, "type": r.json()["problems"][0]["type"]}
    ]


def test_analyze_cross_field_rule(client, sample):
    sample["bias"]["RC"] = None
    r = client.post("/api/analyze", json=sample)
    assert r.status_code == 422
    assert "bias.RC: is required by the common-emitter form" in r.json()["message"]


def test_sweep_good(client, sample):
    r = client.post(
        "/api/sweep",
        json={"design": sample, "param": "RC", "start": "100", "stop": "1k", "points": 5},
    )
    assert r.status_code == 200
    body = r.json()
    assert body["param"] == "RC"
    assert body["values"][0] == pytest.approx(100.0)
    assert body["values"][-1] == pytest.approx(1000.0)
    assert len(body["gain"]) == len(body["f_osc"]) == 5
    # more collector resistance, more loop gain (ideal CE Colpitts: T = gm·RC·C1/C2,
    # textbook, from memory)
    assert body["gain"] == sorted(body["gain"])
    assert 0 < body["threshold"]["value"] < Design.model_validate(sample).bias.RC


def test_sweep_accepts_the_cap_and_refuses_beyond(client, sample):
    base = {"design": sample, "param": "RC", "start": "100", "stop": "1k"}
    r = client.post("/api/sweep", json={**base, "points": MAX_SWEEP_POINTS + 1})
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == "points"
    assert str(MAX_SWEEP_POINTS) in r.json()["message"]
    r = client.post("/api/sweep", json={**base, "points": 1})
    assert r.status_code == 422


@pytest.mark.parametrize(
    ("change", "field"),
    [
        ({"param": "XX"}, "param"),
        ({"param": "CB"}, "param"),  # not part of this common-emitter design
        ({"start": "abc"}, "start"),
        ({"stop": "-5"}, "stop"),
        ({"scale": "cubic"}, "scale"),
    ],
)
def test_sweep_bad_input(client, sample, change, field):
    body = {"design": sample, "param": "RC", "start": "100", "stop": "1k", "points": 5, **change}
    r = client.post("/api/sweep", json=body)
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == field


def test_threshold_default_is_the_gain_setter(client, sample):
    r = client.post("/api/threshold", json={"design": sample})
    assert r.status_code == 200
    body = r.json()
    assert body["param"] == "RC"
    rc = Design.model_validate(sample).bias.RC
    assert body["current"] == rc
    assert 0 < body["value"] < rc  # the sample starts, so RC at threshold is lower


def test_threshold_named_param_and_bad_param(client, sample):
    assert client.post("/api/threshold", json={"design": sample, "param": "RB2"}).status_code == 200
    r = client.post("/api/threshold", json={"design": sample, "param": "nope"})
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == "param"


def test_designs_list_and_get(client):
    listing = client.get("/api/designs").json()
    assert [d["name"] for d in listing] == SAMPLE_KEYS
    for entry in listing:
        r = client.get(f"/api/designs/{entry['name']}")
        assert r.status_code == 200
        assert r.json()["format"] == "ringwise.design"
        assert r.json()["name"] == entry["title"]


@pytest.mark.parametrize(
    "path",
    [
        "/api/designs/..%2Fx",
        "/api/designs/%2e%2e",
        "/api/designs/..%2F..%2Fpyproject.toml",
        "/api/designs/clapp-clock-1M.json",
        "/api/designs/%2Fetc%2Fpasswd",
    ],
)
def test_designs_never_by_path(client, path):
    r = client.get(path)
    assert r.status_code == 404
    assert r.json()["error"] == "not-found"


def test_sheet_valid_and_invalid(client, sample):
    texts = client.post("/api/import", json=sample).json()["fields"]
    good = client.post("/api/sheet", json={"fields": texts}).json()
    assert good["ok"] is True
    assert good["shown"]["loop.f_osc"]["value"] == good["result"]["loop"]["f_osc"]
    assert "sweep" not in good["figures"]  # fetched separately by the sheet
    assert set(good["figures"]) == {"loop", "reactance", "budget", "noise"}
    bad = client.post("/api/sheet", json={"fields": {**texts, "C2": "4n7H"}}).json()
    assert bad["ok"] is False
    assert bad["fields"]["C2"]["text"] == "4n7H"  # kept as typed
    assert bad["fields"]["C2"]["error"] == "'4n7H' carries the unit 'H', this field takes 'F'"
    assert bad["problems"][0]["field"] == "tank.C2"


def test_sheet_answers_with_the_plots_asked_for(client, sample):
    # the live sheet asks only for the plots on screen; the steady answer for all
    texts = client.post("/api/import", json=sample).json()["fields"]
    full = client.post("/api/sheet", json={"fields": texts}).json()
    some = client.post("/api/sheet", json={"fields": texts, "figures": ["loop", "noise"]}).json()
    assert set(some["figures"]) == {"loop", "noise"}
    assert some["figures"] == {k: full["figures"][k] for k in ("loop", "noise")}
    assert {k: v for k, v in some.items() if k != "figures"} == {
        k: v for k, v in full.items() if k != "figures"
    }
    none = client.post("/api/sheet", json={"fields": texts, "figures": []}).json()
    assert none["ok"] is True and none["figures"] == {}
    steady = client.post("/api/sheet/steady", json={"fields": texts, "figures": ["budget"]})
    assert set(steady.json()["figures"]) == {"budget"}


def test_sheet_unknown_plot_is_422(client, sample):
    texts = client.post("/api/import", json=sample).json()["fields"]
    r = client.post("/api/sheet", json={"fields": texts, "figures": ["loop", "sweep"]})
    assert r.status_code == 422
    [problem] = r.json()["problems"]
    assert problem["field"] == "figures"
    assert problem["message"] == (
        "unknown plot 'sweep'; known: loop, reactance, budget, noise, tuning"
    )


def test_sheet_unknown_field_is_422(client):
    r = client.post("/api/sheet", json={"fields": {"Lx": "1"}})
    assert r.status_code == 422
    assert r.json()["problems"] == [
        {"field": "fields.Lx", "message": "is not a design field", "type": "extra_forbidden"}
    ]


def test_sheet_sweep(client, sample):
    texts = client.post("/api/import", json=sample).json()["fields"]
    body = client.post("/api/sheet/sweep", json={"fields": texts, "param": "RB2"}).json()
    assert body["ok"] is True
    assert body["param"] == "RB2"
    assert body["figure"]["layout"]["xaxis"]["title"]["text"] == "RB2 (Ω)"
    bad = client.post("/api/sheet/sweep", json={"fields": {**texts, "L": ""}}).json()
    assert bad == {"ok": False, "figure": None}


@pytest.mark.parametrize("name", ["clapp-clock-1M", "common-base-carrier-10M"])
def test_sheet_sweep_marks_the_threshold_the_sheet_shows(client, name):
    # on the gain setter the what-if plot reuses the analysis's threshold (not a
    # second search, whose last digits could differ from the figure beside it)
    from ringwise.web.samples import sample_texts

    texts = sample_texts()[name]
    sheet = client.post("/api/sheet", json={"fields": texts}).json()
    startup = sheet["result"]["startup"]
    body = client.post(
        "/api/sheet/sweep", json={"fields": texts, "threshold_hint": startup["threshold_value"]}
    ).json()
    assert body["param"] == startup["threshold_param"]
    [marker] = [s for s in body["figure"]["layout"]["shapes"] if s["name"].startswith("threshold")]
    assert marker["x0"] == startup["threshold_value"]


@pytest.mark.parametrize(
    ("param", "says"),
    [("XYZ", "is not a part"), ("F_dB", "is not a part"), ("C3", "cannot be swept in this design")],
)
def test_sheet_sweep_unknown_parameter_is_422(client, sample, param, says):
    # it used to fall back silently to the gain setter; the sample has no C3 (not a Clapp)
    sample["tank"].pop("C3", None)
    texts = client.post("/api/import", json=sample).json()["fields"]
    r = client.post("/api/sheet/sweep", json={"fields": texts, "param": param})
    assert r.status_code == 422
    [problem] = r.json()["problems"]
    assert problem["field"] == "param"
    assert says in problem["message"]


def test_import_and_export_round_trip(client, sample):
    imported = client.post("/api/import", json=sample).json()
    exported = client.get(f"/api/export?{imported['query']}")
    assert exported.status_code == 200
    assert exported.headers["content-disposition"].startswith("attachment; filename=")
    again = client.post("/api/import", json=exported.json()).json()
    assert again == imported
    assert client.get(f"/api/export?{again['query']}").content == exported.content


@pytest.mark.parametrize(
    ("doc", "field"),
    [
        ([1, 2], "design"),
        ({"format": "other", "version": 1}, "format"),
        ({"format": "ringwise.design", "version": 2}, "version"),
        ({"format": "ringwise.design", "version": 1, "tank": {"Lx": "1"}}, "tank.Lx"),
        ({"format": "ringwise.design", "version": 1, "tank": {"L": [1]}}, "tank.L"),
        ({"format": "ringwise.design", "version": 1, "tank": 5}, "tank"),
    ],
)
def test_import_refuses_what_is_not_a_design_file(client, doc, field):
    r = client.post("/api/import", json=doc)
    assert r.status_code == 422
    assert field in [p["field"] for p in r.json()["problems"]]


def test_export_refuses_an_invalid_design(client):
    r = client.get("/api/export?design=clapp-clock-1M&C2=abc")
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == "tank.C2"


_text = st.text(alphabet=st.characters(codec="utf-8"), max_size=12)


@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(name=st.sampled_from([f.name for f in FIELDS]), text=_text)
def test_no_input_text_gives_500(client, sample, name, text):
    texts = client.post("/api/import", json=sample).json()["fields"]
    r = client.post("/api/sheet", json={"fields": {**texts, name: text}})
    assert r.status_code == 200
    view = r.json()
    assert view["fields"][name]["text"] == text
    if view["ok"]:
        assert all(
            v is None or (isinstance(v, float | int) and math.isfinite(v))
            for v in view["result"]["loop"].values()
            if not isinstance(v, list | dict)
        )
        assert all_finite(view["result"]["loop"])


@settings(
    max_examples=30, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
# Subnormal floats are left out: the core's DC solve then emits a numpy RuntimeWarning,
# which this suite's filterwarnings=error turns into an exception (reported to the core).
@given(
    value=st.one_of(
        st.floats(allow_nan=False, allow_infinity=False, allow_subnormal=False), _text, st.none()
    )
)
def test_no_value_gives_500_on_analyze(client, sample, value):
    sample["bias"]["RE"] = value
    r = client.post("/api/analyze", json=sample)
    assert r.status_code in (200, 422)


def test_sheet_answer_has_its_declared_shape(client) -> None:
    # POST /api/sheet documents SheetView in the OpenAPI and answers in that shape,
    # for a design that analyses and for one that does not.
    from ringwise.web.samples import DEFAULT_SAMPLE, sample_texts
    from ringwise.web.schemas import SheetView

    texts = sample_texts()[DEFAULT_SAMPLE]
    for fields, ok in ((texts, True), ({**texts, "C1": "-3"}, False)):
        answer = client.post("/api/sheet", json={"fields": fields})
        assert answer.status_code == 200
        view = SheetView.model_validate(answer.json())
        assert view.ok is ok
    schema = client.get("/openapi.json").json()["paths"]["/api/sheet"]["post"]
    assert "SheetView" in str(schema["responses"]["200"])
