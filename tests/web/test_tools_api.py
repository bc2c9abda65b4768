"""The sheet's on-demand panels over HTTP (app/web/routers/tools.py, app/web/tools.py):
the answers are the JSON API's, with display texts, and bad input names its field."""

from __future__ import annotations

import re

import pytest
from fastapi.testclient import TestClient

from ringwise.design import Design
from ringwise.web.fields import document
from ringwise.web.samples import DEFAULT_SAMPLE, sample_texts
from ringwise.web.server import create_app
from ringwise.web.tools import texts_for_design, value_text

TEXTS = sample_texts()[DEFAULT_SAMPLE]
#: Few samples: these tests check the plumbing, not the statistics.
SAMPLES = 200


def test_spread_is_the_api_answer_with_texts(client):
    r = client.post(
        "/api/sheet/spread",
        json={"fields": TEXTS, "samples": str(SAMPLES), "seed": "7", "window_low": "950k",
              "window_high": "1.05M"},
    )  # fmt: skip
    assert r.status_code == 200
    got = r.json()
    api = client.post(
        "/api/spread",
        json={"design": document(TEXTS), "samples": SAMPLES, "seed": 7,
              "window": {"low": 950e3, "high": 1.05e6}},
    ).json()  # fmt: skip
    assert got["result"] == api
    shown = got["shown"]
    assert shown["spread.yield_start"]["raw"] == repr(api["spread"]["yield_start"])
    assert shown["spread.yield_start"]["text"].endswith(" %")
    assert shown["spread.f_osc.p50"]["text"].endswith("Hz")
    assert set(got["temperatures"]) == set(api["spread"]["yield_by_temperature"])
    h = got["figures"]["f_hist"]
    bars = h["data"][0]
    assert len(bars["x"]) == len(bars["y"]) == len(api["spread"]["f_histogram"]["counts"])
    assert [s["x0"] for s in h["layout"]["shapes"]] == [950e3, 1.05e6]  # the window's ends
    sens = got["figures"]["sensitivity"]["data"][0]
    assert sens["y"][0] == api["spread"]["sensitivities"][0]["part"]
    # β and I_S are drawn over a ratio range and shown as one, never as "± x %"
    design = Design.model_validate(document(TEXTS))
    for i, row in enumerate(api["spread"]["sensitivities"][: len(got["sensitivity_rows"])]):
        text = shown[f"spread.sensitivities.{i}.tolerance"]["text"]
        if row["part"] == "beta":
            assert text == f"{design.tolerances.beta_ratio:g}:1 range"
        elif row["part"] == "IS":
            assert text == f"{design.tolerances.IS_ratio:g}:1 range"
        else:
            assert text.startswith("± ") and text.endswith(" %")


@pytest.mark.parametrize(
    ("body", "field"),
    [
        ({"samples": "lots"}, "samples"),
        ({"samples": "0"}, "samples"),
        ({"samples": "100001"}, "samples"),
        ({"seed": "-1"}, "seed"),
        ({"window_low": "1M"}, "window_high"),
        ({"window_low": "2M", "window_high": "1M"}, "window_high"),
        ({"window_low": "1 kF", "window_high": "2M"}, "window_low"),
        ({"margin": "0.5"}, "margin"),
    ],
)
def test_spread_bad_input_names_its_field(client, body, field):
    r = client.post("/api/sheet/spread", json={"fields": TEXTS, **body})
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == field


def test_a_design_with_problems_is_refused_naming_the_field(client):
    r = client.post("/api/sheet/spread", json={"fields": {**TEXTS, "L": "47uF"}})
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == "fields.tank.L"


def test_snap_previews_and_gives_texts(client):
    texts = {**TEXTS, "RC": "1234"}
    r = client.post("/api/sheet/snap", json={"fields": texts, "series": "E12"})
    assert r.status_code == 200
    got = r.json()
    assert "RC" in got["changed"]
    assert got["fields"]["RC"] == "1.2k"  # IEC 60063 E12: 1.0 1.2 1.5 ...
    kept = [k for k in texts if k not in got["changed"]]
    assert all(got["fields"][k] == texts[k] for k in kept)  # the rest as typed
    assert got["result"]["f_after"] == pytest.approx(
        client.post("/api/analyze", json=document(got["fields"])).json()["loop"]["f_osc"],
        rel=1e-12,
    )
    bad = client.post("/api/sheet/snap", json={"fields": TEXTS, "series": "E7"})
    assert bad.status_code == 422 and bad.json()["problems"][0]["field"] == "series"


def test_snap_can_keep_the_frequency(client):
    texts = {**TEXTS, "C1": "1.07n", "C2": "2.05n", "L": "10.6u"}
    plain = client.post("/api/sheet/snap", json={"fields": texts, "series": "E12"}).json()
    assert plain["shown"]["trim"]["hidden"] is True
    r = client.post(
        "/api/sheet/snap", json={"fields": texts, "series": "E12", "keep_frequency": True}
    )
    assert r.status_code == 200
    got = r.json()
    assert got["result"]["trimmed"] is True
    assert got["shown"]["trim"]["text"].startswith("C")
    assert "trimmed from" in got["shown"]["trim"]["text"]
    f0, f1 = got["result"]["f_before"], got["result"]["f_after"]
    assert abs(f1 / f0 - 1) < abs(plain["result"]["f_after"] / f0 - 1)
    # what the form would hold oscillates where the answer says
    assert got["result"]["f_after"] == pytest.approx(
        client.post("/api/analyze", json=document(got["fields"])).json()["loop"]["f_osc"],
        rel=1e-9,
    )


def test_synthesize_gives_form_texts_of_the_design(client):
    r = client.post(
        "/api/sheet/synthesize",
        json={"fields": TEXTS, "topology": "common-emitter", "f": "1M", "Vcc": "12", "IC": "1m"},
    )
    assert r.status_code == 200
    got = r.json()
    design = Design.model_validate(document(got["fields"])).model_dump(mode="json")
    proposed = Design.model_validate(got["result"]["design"]).model_dump(mode="json")
    # written as engineering text of at most 4 significant digits (a trimmed capacitor
    # is rounded there), so equal within that rounding
    assert _flat(design) == pytest.approx(_flat(proposed), rel=5e-4)
    assert got["result"]["reasons"]
    for body, field in (({"f": "1 MF", "Vcc": "12", "IC": "1m"}, "f"), ({"f": "1M"}, "Vcc")):
        bad = client.post("/api/sheet/synthesize", json={"fields": TEXTS, **body})
        assert bad.status_code == 422 and bad.json()["problems"][0]["field"] == field


def test_synthesize_keeps_the_sheets_load_coil_and_transistor(client):
    texts = {**TEXTS, "R_load": "6k8", "Q_L": "100", "preset": "rf"}
    body = {"fields": texts, "topology": "common-emitter", "f": "7M", "Vcc": "12", "IC": "2m"}
    got = client.post("/api/sheet/synthesize", json=body).json()
    assert got["fields"]["R_load"] == "6k8" and got["fields"]["Q_L"] == "100"
    design = Design.model_validate(got["result"]["design"])
    assert design.device.preset == "rf" and design.load.R_load == 6800.0
    assert got["shown"]["miss"]["text"].endswith(" %")
    assert abs(got["result"]["miss"]) < 2e-3
    # asked to choose them, it does: no load, a typical coil Q, the general-purpose class
    chosen = client.post(
        "/api/sheet/synthesize",
        json={**body, "choose_load": True, "choose_Q_L": True, "choose_device": True},
    ).json()["result"]["design"]
    assert chosen["load"]["R_load"] is None and chosen["tank"]["Q_L"] == 80.0
    assert chosen["device"]["preset"] == "general-purpose"
    clapp = client.post("/api/sheet/synthesize", json={**body, "clapp": True}).json()
    assert clapp["fields"]["C3"] != "" and clapp["result"]["design"]["tank"]["C3"] is not None
    refused = client.post(
        "/api/sheet/synthesize",
        json={
            **body,
            "topology": "common-collector",
            "f": "30M",
            "IC": "5m",
            "choose_device": True,
        },
    )
    assert refused.status_code == 422
    assert "below 50 nH" in refused.json()["problems"][0]["message"]


def _flat(doc, prefix=""):
    """The numbers of a design document by dotted path."""
    out = {}
    for key, value in doc.items():
        if isinstance(value, dict):
            out.update(_flat(value, f"{prefix}{key}."))
        elif isinstance(value, float | int) and not isinstance(value, bool):
            out[prefix + key] = value
    return out


def test_reconcile_gives_explanation_and_as_built_texts(client):
    r = client.post("/api/sheet/reconcile", json={"fields": TEXTS, "f_measured": "1.03M"})
    assert r.status_code == 200
    got = r.json()
    assert got["shown"]["explanation"]["text"] == got["result"]["explanation"]
    built = Design.model_validate(document(got["fields"])).model_dump(mode="json")
    fitted = Design.model_validate(got["result"]["as_built"]).model_dump(mode="json")
    # the fitted values are written rounded to 4 significant digits, never as float dust
    assert _flat(built) == pytest.approx(_flat(fitted), rel=5e-4)
    for name, text in got["fields"].items():
        if text and text[0].isdigit():
            assert len(re.sub(r"[^0-9]", "", text).strip("0")) <= 4, (name, text)
    for body, field in (
        ({"f_measured": ""}, "f_measured"),
        ({"f_measured": "1M", "threshold_param": "RC"}, "threshold_value"),
        ({"f_measured": "1M", "threshold_value": "180"}, "threshold_param"),
        ({"f_measured": "1M", "threshold_param": "XY", "threshold_value": "1"}, "threshold.param"),
    ):
        bad = client.post("/api/sheet/reconcile", json={"fields": TEXTS, **body})
        assert bad.status_code == 422, body
        assert bad.json()["problems"][0]["field"] == field


@pytest.mark.parametrize(
    ("value", "text"),
    [
        (2.2e-9, "2.2n"),
        (2.2000000000000003e-9, "2.2n"),  # float dust of a computation
        (429.99999999999996e-12, "430p"),
        (180e3, "180k"),
        (6.734e-15, "6.734f"),
        (0.1, "100m"),
        (25.0, "25"),
        # a fitted value: rounded to 4 significant digits (common practice, no source)
        (211.18181518150605e-12, "211.2p"),
        (6.309615073440433, "6.31"),
        (123456.789, "123.5k"),
    ],
)
def test_value_text_is_clean_engineering_notation(value, text):
    from ringwise.units import parse_quantity

    assert value_text(value) == text
    assert parse_quantity(text) == pytest.approx(value, rel=5e-4)


def test_texts_for_design_keeps_unchanged_texts_and_tolerances():
    texts = {**TEXTS, "tol_R": "0.02", "L": "10 uH"}
    design = Design.model_validate(document(texts))
    assert texts_for_design(design, texts) == texts


def test_a_design_that_does_not_start_still_answers(client):
    r = client.post(
        "/api/sheet/spread", json={"fields": {**TEXTS, "RC": "10"}, "samples": str(SAMPLES)}
    )
    assert r.status_code == 200
    assert r.json()["shown"]["spread.yield_start"]["raw"] == "0.0"


def _spread_shown(client, texts, samples, seed):
    body = {"fields": texts, "samples": str(samples), "seed": str(seed)}
    return client.post("/api/sheet/spread", json=body).json()["shown"]


def test_summary_has_the_spread_section():
    from ringwise.web.tools import SUMMARY_SAMPLES, SUMMARY_SEED

    texts = sample_texts()["clapp-clock-1M"]
    # a fresh app, which has computed no spread of the design: a small one of its own
    with TestClient(create_app(), base_url="http://127.0.0.1") as client:
        page = client.get("/summary?design=clapp-clock-1M")
        assert page.status_code == 200
        want = _spread_shown(client, texts, SUMMARY_SAMPLES, SUMMARY_SEED)
        for path in ("spread.yield_start", "spread.f_osc.p5", "spread.sensitivities.2.part"):
            assert f'data-field="{path}" data-value="{want[path]["raw"]}"' in page.text
        assert "spread.sensitivities.3.part" not in page.text  # the top three only
        # once the sheet has run a spread of the design, the summary shows that one
        mine = _spread_shown(client, texts, 150, 9)
        page = client.get("/summary?design=clapp-clock-1M").text
        assert "(150 samples, seed 9," in page
        assert f'data-field="spread.f_osc.p5" data-value="{mine["spread.f_osc.p5"]["raw"]}"' in page
        # a design that cannot be computed has no spread section, and no error
        bad = client.get("/summary?design=clapp-clock-1M&L=47uF")
        assert bad.status_code == 200 and "spread.yield_start" not in bad.text
        assert "server was busy" not in bad.text


@pytest.mark.parametrize(
    ("url", "body", "field"),
    [
        ("/api/sheet/reconcile", {"f_measured": "5e-324"}, "f_measured"),
        ("/api/sheet/reconcile", {"f_measured": "1M", "amplitude": "1e-320"}, "amplitude"),
        ("/api/sheet/spread", {"window_low": "1e-320", "window_high": "1M"}, "window_low"),
    ],
)
def test_subnormal_texts_are_refused_naming_the_field(client, url, body, field):
    r = client.post(url, json={"fields": TEXTS, **body})
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == field
