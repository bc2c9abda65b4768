"""Every exported CSV parses back with the csv module to the numbers the API returns."""

from __future__ import annotations

import csv
import io
import json

import pytest

from ringwise.analysis.analyze import analyze
from ringwise.analysis.spread import monte_carlo, spread_out
from ringwise.analysis.transient import simulate
from ringwise.cli import main
from ringwise.exports import (
    RESULT_SERIES,
    columns_csv,
    csv_text,
    result_series,
    samples_table,
    temperature_table,
)
from tests.conftest import load_sample, sample_paths


def _parse(text: str) -> tuple[list[str], list[list[float | None]]]:
    header, *rows = list(csv.reader(io.StringIO(text)))
    cols = [[float(r[i]) if r[i] else None for r in rows] for i in range(len(header))]
    return header, cols


@pytest.fixture(scope="module")
def design():
    return load_sample(sample_paths()[0])


def test_phase_noise_curve(design) -> None:
    result = analyze(design).model_dump(mode="json")
    header, cols = result_series(result, "phase-noise")
    back_header, back = _parse(columns_csv(header, cols))
    assert back_header == ["offset [Hz]", "L(f) [dBc/Hz]"]
    assert back == [result["stability"]["curve"]["offset"], result["stability"]["curve"]["dBc_Hz"]]


def test_computed_phase_noise_and_sources(design) -> None:
    result = analyze(design).model_dump(mode="json")
    header, cols = result_series(result, "phase-noise-computed")
    _, back = _parse(columns_csv(header, cols))
    curve = result["stability"]["spectrum_curve"]
    assert back == [curve["offset"], curve["dBc_Hz"]]
    header, cols = result_series(result, "noise-sources")
    assert header[0] == "source"
    assert cols[0] == [s["name"] for s in result["stability"]["sources"]]
    assert sum(cols[1]) == pytest.approx(1.0)


@pytest.mark.parametrize("series", ["waveform", "envelope", "spectrum"])
def test_simulation_series(design, series: str) -> None:
    sim = simulate(design, cycles=40, points=200).model_dump(mode="json")
    header, cols = result_series(sim, series)
    _, back = _parse(columns_csv(header, cols))
    parent, keys = RESULT_SERIES[series]
    node = sim["transient"][parent.split(".")[-1]]
    assert back == [node[k] for k, _ in keys]


def test_monte_carlo_samples_and_temperature_band(design) -> None:
    run = monte_carlo(design, samples=50, seed=3)
    header, cols = samples_table(run)
    rows = list(csv.DictReader(io.StringIO(columns_csv(header, cols))))
    assert len(rows) == 50 * len(run.temperatures)
    first_T = [r for r in rows if float(r["T [°C]"]) == run.temperatures[0]]
    assert [float(r["L"]) for r in first_T] == run.draws.values["L"].tolist()
    assert [float(r["loop gain"]) for r in first_T] == run.batches[0].gain.tolist()
    # the yield the API reports is the share of samples that start at every temperature
    starts = {}
    for r in rows:
        starts.setdefault(r["sample"], []).append(r["starts"] == "true")
    result = spread_out(design, run).model_dump(mode="json")
    assert sum(all(v) for v in starts.values()) / 50 == result["spread"]["yield_start"]
    header, cols = temperature_table(result)
    _, back = _parse(columns_csv(header, cols))
    assert back[0] == [p["T_C"] for p in result["spread"]["f_vs_temperature"]]


def test_cells_round_trip_and_missing_values_are_empty() -> None:
    text = csv_text(["a", "b"], [[0.1 + 0.2, None], [float("nan"), True]])
    assert text == "a,b\r\n0.30000000000000004,\r\n,true\r\n"
    with pytest.raises(ValueError, match="different lengths"):
        columns_csv(["a", "b"], [[1, 2], [1]])


def test_cli_spread_samples_csv(capsys) -> None:
    path = str(sample_paths()[0])
    main(["spread", path, "--samples", "20", "--format", "csv", "--series", "samples"])
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    main(["spread", path, "--samples", "20", "--format", "json"])
    data = json.loads(capsys.readouterr().out)
    assert len(rows) == 20 * len(data["spread"]["temperatures_C"])


def test_cli_simulate_waveform_csv(capsys) -> None:
    path = str(sample_paths()[0])
    argv = ["simulate", path, "--cycles", "30", "--points", "150"]
    main([*argv, "--waveforms"])
    data = json.loads(capsys.readouterr().out)
    main([*argv, "--format", "csv", "--series", "waveform"])
    _, back = _parse(capsys.readouterr().out)
    assert back[0] == data["transient"]["waveform"]["t"]
    assert back[1] == data["transient"]["waveform"]["v_out"]
