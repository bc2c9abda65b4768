"""CSV downloads of the sheet's plots, the run's curves and the Monte Carlo samples:
each parses back with the csv module to the numbers the API returns."""

from __future__ import annotations

import csv
import io
import time

import pytest

from ringwise.analysis.spread import monte_carlo
from tests.conftest import load_sample, sample_paths


def _columns(text: str) -> tuple[list[str], list[list[float | None]]]:
    header, *rows = list(csv.reader(io.StringIO(text)))
    return header, [[float(r[i]) if r[i] else None for r in rows] for i in range(len(header))]


@pytest.mark.parametrize(
    ("plot", "series"),
    [
        # (trace, axis) of the sheet's figure that each CSV column must equal
        ("loop", ((0, "x"), (0, "y"), (1, "y"))),
        ("sweep", ((0, "x"), (1, "y"), (0, "y"))),
        # the computed curve, then Leeson's drawn beside it, on the same offsets
        ("noise", ((0, "x"), (0, "y"), (1, "y"))),
    ],
)
def test_sheet_plots_parse_back_to_the_sheets_data(client, plot, series) -> None:
    figure = client.get("/sheet.json?design=clapp-clock-1M").json()["figures"][plot]
    answer = client.get(f"/api/csv/sheet/{plot}?design=clapp-clock-1M")
    assert answer.status_code == 200
    assert answer.headers["content-type"].startswith("text/csv")
    assert "attachment" in answer.headers["content-disposition"]
    _, cols = _columns(answer.text)
    assert cols == [figure["data"][i][axis] for i, axis in series]


def test_reactances_have_a_column_per_part(client) -> None:
    figure = client.get("/sheet.json?design=clapp-clock-1M").json()["figures"]["reactance"]
    header, cols = _columns(client.get("/api/csv/sheet/reactance?design=clapp-clock-1M").text)
    assert header[0] == "f [Hz]" and len(header) == len(figure["data"]) + 1
    assert cols[1:] == [trace["y"] for trace in figure["data"]]


def test_a_bad_design_is_a_422_naming_the_field(client) -> None:
    answer = client.get("/api/csv/sheet/loop?design=clapp-clock-1M&L=-5")
    assert answer.status_code == 422
    assert answer.json()["problems"][0]["field"] == "tank.L"
    assert client.get("/api/csv/sheet/budget?design=clapp-clock-1M").status_code == 422


def test_spread_samples_are_the_monte_carlo_samples(client) -> None:
    answer = client.get("/api/csv/spread?design=clapp-clock-1M&samples=25&seed=7")
    assert answer.status_code == 200
    rows = list(csv.DictReader(io.StringIO(answer.text)))
    run = monte_carlo(load_sample(sample_paths()[0]), 25, 7)
    assert len(rows) == 25 * len(run.temperatures)
    assert [float(r["C2"]) for r in rows[:25]] == run.draws.values["C2"].tolist()
    refused = client.get("/api/csv/spread?design=clapp-clock-1M&samples=0")
    assert refused.status_code == 422 and refused.json()["problems"][0]["field"] == "samples"


def test_a_runs_curves_from_its_job(client, sample) -> None:
    job = client.post("/api/simulate/jobs", json={"design": sample, "cycles": 30, "points": 200})
    assert job.status_code == 202
    job_id = job.json()["id"]
    deadline = time.monotonic() + 120
    # a run just posted may still be queued (its worker process is being forked)
    while (state := client.get(f"/api/simulate/jobs/{job_id}").json())["state"] in (
        "queued",
        "running",
    ):
        assert time.monotonic() < deadline
        time.sleep(0.2)
    assert state["state"] == "done"
    waveform = state["result"]["transient"]["waveform"]
    answer = client.get(f"/api/simulate/jobs/{job_id}/csv/waveform")
    _, cols = _columns(answer.text)
    assert cols == [waveform["t"], waveform["v_out"], waveform["v_be"]]
    spectrum = client.get(f"/api/simulate/jobs/{job_id}/csv/spectrum")
    assert _columns(spectrum.text)[1][0] == state["result"]["transient"]["spectrum"]["f"]
    assert client.get("/api/simulate/jobs/nope/csv/waveform").status_code == 404


@pytest.mark.browser
def test_the_sheets_csv_links_follow_the_design(context, live_server, client) -> None:
    from tests.web.test_browser import Sheet, settle

    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    sheet.page.fill("[name='C2']", "3n3")
    settle(sheet, client)
    for plot in ("loop", "sweep", "reactance", "noise"):
        href = sheet.attr(f"a[data-csv='{plot}']", "href")
        assert href.startswith(f"/api/csv/sheet/{plot}?") and "C2=3n3" in href
        with sheet.page.expect_download() as info:
            sheet.page.click(f"a[data-csv='{plot}']")
        path = info.value.path()
        header = path.read_text(encoding="utf-8").splitlines()[0]
        assert client.get(href).text.splitlines()[0] == header
    assert sheet.errors == []


def test_a_varactor_spread_has_a_row_per_sample_temperature_and_tuning_voltage(client) -> None:
    answer = client.get("/api/csv/spread?design=varactor-lo-5M&samples=10&seed=3")
    assert answer.status_code == 200, answer.text
    rows = list(csv.DictReader(io.StringIO(answer.text)))
    run = monte_carlo(
        load_sample(next(p for p in sample_paths() if p.stem == "varactor-lo-5M")), 10, 3
    )
    assert len(rows) == 10 * len(run.temperatures) * len(run.tuning_voltages)
    assert sorted({float(r["V_tune [V]"]) for r in rows}) == run.tuning_voltages
    assert [r["starts"] == "true" for r in rows] == run.starts.reshape(-1).tolist()
