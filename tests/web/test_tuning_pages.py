"""The varactor's inputs, results panel, plot and summary lines on the pages, and its
figures in the command line's answer; a crystal design on the sheet without a coil."""

from __future__ import annotations

import json
import re

from ringwise.cli import main
from tests.conftest import SAMPLES

SAMPLE = "varactor-lo-5M"


def test_sheet_shows_the_tuning_panel_and_plot(client):
    html = client.get(f"/?design={SAMPLE}").text
    for name in ("V_tune", "C_v", "C_j0", "m_j", "R_tune", "V_min", "V_max", "v_preset", "place"):
        assert f'name="{name}"' in html, name
    panel = re.search(r'<section[^>]*data-panel="tuning"[^>]*>', html).group(0)
    assert "hidden" not in panel
    assert 'id="plot-tuning"' in html
    assert 'data-field="tuning.K_ratio"' in html
    view = client.get(f"/sheet.json?design={SAMPLE}").json()
    assert "tuning" in view["figures"]
    assert view["shown"]["tuning.starts_everywhere"]["text"] in ("yes", "no")
    # a design without a varactor hides the panel and has no tuning plot
    plain = client.get("/?design=clapp-clock-1M").text
    assert "hidden" in re.search(r'<figure[^>]*data-panel="tuning"[^>]*>', plain).group(0)
    assert "tuning" not in client.get("/sheet.json?design=clapp-clock-1M").json()["figures"]


def test_summary_prints_the_tuning_line(client):
    html = client.get(f"/summary?design={SAMPLE}").text
    line = html.split('<p class="sum-tuning">')[1].split("</p>")[0]
    assert "V_min" in line and 'data-field="tuning.K_ratio"' in line
    assert '<p class="sum-tuning">' not in client.get("/summary?design=clapp-clock-1M").text


def test_cli_table_and_json_carry_the_tuning(capsys):
    path = str(SAMPLES / f"{SAMPLE}.json")
    assert main(["analyze", path]) == 0
    data = json.loads(capsys.readouterr().out)
    t = data["tuning"]
    assert t["starts_everywhere"] is True and len(t["points"]) == 3
    assert t["f_low"] < data["loop"]["f_osc"] < t["f_high"]
    assert main(["analyze", path, "--format", "table"]) == 0
    out = capsys.readouterr().out
    assert "Tuning gain K at V_min" in out and "RF swing forward-biases the diode" in out


def test_a_crystal_design_on_the_sheet_needs_no_coil(client):
    view = client.get("/sheet.json?design=crystal-clock-10M&L=&Q_L=").json()
    assert view["ok"] and view["problems"] == []
    assert view["result"]["crystal"]["margin"] > 0
    coil = client.get("/sheet.json?design=clapp-clock-1M&Q_L=").json()
    assert not coil["ok"]
    assert any(p.get("field") == "tank.Q_L" for p in coil["problems"])


def test_the_spread_panel_names_the_tuning_voltages_and_the_crystals_worst_corner(client):
    from ringwise.web.samples import sample_texts

    texts = sample_texts()
    body = {"samples": "20", "seed": "4"}
    tuned = client.post("/api/sheet/spread", json={"fields": texts[SAMPLE], **body}).json()
    assert tuned["shown"]["spread.tuning_voltages"]["text"].count("V") == 4
    assert tuned["shown"]["spread.crystal_worst"]["text"] == "no crystal"
    worst = tuned["shown"]["spread.worst_cases.0.V_tune"]
    assert worst["value"] in tuned["result"]["spread"]["tuning_voltages"]
    xtal = client.post(
        "/api/sheet/spread", json={"fields": texts["crystal-clock-10M"], **body}
    ).json()
    sp = xtal["result"]["spread"]
    shown = xtal["shown"]["spread.crystal_worst"]
    assert shown["value"] == sp["crystal_worst"]["margin"] == sp["crystal_margin_min"]
    assert shown["text"].startswith(f"sample {sp['crystal_worst']['sample']} at ")
    assert xtal["shown"]["spread.tuning_voltages"]["text"].startswith("no varactor")


def test_cli_csv_of_the_tuning_curve(capsys):
    path = str(SAMPLES / f"{SAMPLE}.json")
    assert main(["analyze", path]) == 0
    t = json.loads(capsys.readouterr().out)["tuning"]
    assert main(["analyze", path, "--format", "csv", "--series", "tuning"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    assert lines[0].startswith("V_tune [V],f_osc [Hz],K [Hz/V]")
    rows = [[float(x) for x in line.split(",")] for line in lines[1:]]
    assert [r[0] for r in rows] == t["V"] and [r[1] for r in rows] == t["f_osc"]
    assert [r[2] for r in rows] == t["K"]


def test_the_tuning_plot_downloads_as_csv(client):
    r = client.get(f"/api/csv/sheet/tuning?design={SAMPLE}")
    assert r.status_code == 200
    lines = r.text.strip().splitlines()
    assert lines[0] == "V_tune [V],f_osc [Hz],K [Hz/V],loop gain"
    figure = client.get(f"/sheet.json?design={SAMPLE}").json()["figures"]["tuning"]
    f_col = [float(line.split(",")[1]) for line in lines[1:]]
    assert f_col == figure["data"][0]["y"]
    # a design without a varactor has no such curve: a 422 naming why
    assert client.get("/api/csv/sheet/tuning?design=clapp-clock-1M").status_code == 422
