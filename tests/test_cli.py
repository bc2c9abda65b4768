"""The command line: same JSON as the API, exit code 2 on bad input."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from ringwise.cli import EXIT_BAD_INPUT, main
from tests.conftest import sample_paths


def _run(capsys, *argv: str) -> tuple[int, dict | None, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, (json.loads(out) if out.strip() else None), err


def test_analyze_prints_the_contract(capsys) -> None:
    code, data, _ = _run(capsys, "analyze", str(sample_paths()[0]))
    assert code == 0
    for section, keys in {
        "operating_point": {"VB", "VE", "VC", "IC", "IB", "VCE", "P_device", "region"},
        "small_signal": {"gm", "r_pi", "r_o", "C_pi", "C_mu"},
        "tank": {"C_series", "f_ideal", "feedback_ratio"},
        "loop": {"f_osc", "gain", "gain_ideal", "phase_slope", "Q_loaded", "budget"},
        "poles": {"sigma", "f"},
        "startup": {"verdict", "margin", "threshold_RC"},
    }.items():
        assert keys <= set(data[section]), section
    assert isinstance(data["warnings"], list)


def test_threshold_and_sweep(capsys, tmp_path: Path) -> None:
    path = str(sample_paths()[0])
    code, th, _ = _run(capsys, "threshold", path, "--param", "RB2")
    assert code == 0 and th["param"] == "RB2" and th["value"] > 0
    code, sw, _ = _run(capsys, "sweep", path, "--param", "RC", "--from", "100", "--to", "2k",
                       "--points", "12")  # fmt: skip
    assert code == 0
    assert len(sw["values"]) == 12
    assert sw["values"][0] == pytest.approx(100) and sw["values"][-1] == pytest.approx(2000)
    assert all(g is None or math.isfinite(g) for g in sw["gain"])


def test_bad_design_exits_2_naming_the_field(capsys, tmp_path: Path) -> None:
    data = json.loads(sample_paths()[0].read_text())
    data["tank"]["C1"] = "lots"
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(data))
    code, out, err = _run(capsys, "analyze", str(bad))
    assert code == EXIT_BAD_INPUT and out is None
    assert "tank.C1" in err and "'lots' is not a number" in err


@pytest.mark.parametrize(
    ("argv", "needle"),
    [
        (["analyze", "/nonexistent/design.json"], "cannot read"),
        (["threshold", "{sample}", "--param", "Rx"], "unknown parameter 'Rx'"),
        (["sweep", "{sample}", "--param", "RC", "--from", "x", "--to", "1k"], "--from"),
        (["sweep", "{sample}", "--param", "RC", "--from", "1", "--to", "1k", "--points", "5000"],
         "points must be between"),
    ],
)  # fmt: skip
def test_bad_arguments_exit_2(capsys, argv: list[str], needle: str) -> None:
    argv = [a.replace("{sample}", str(sample_paths()[0])) for a in argv]
    code, _, err = _run(capsys, *argv)
    assert code == EXIT_BAD_INPUT
    assert needle in err


def test_not_json(capsys, tmp_path: Path) -> None:
    bad = tmp_path / "x.json"
    bad.write_text("{not json")
    code, _, err = _run(capsys, "analyze", str(bad))
    assert code == EXIT_BAD_INPUT and "is not JSON" in err


def test_snap_prints_a_design_and_reports_changes(capsys) -> None:
    code, data, err = _run(capsys, "snap", str(sample_paths()[0]), "--series", "E6")
    assert code == 0 and data["format"] == "ringwise.design"
    assert "f_osc" in err and "loop gain" in err
    code, _, err = _run(capsys, "snap", str(sample_paths()[0]), "--series", "E7")
    assert code == EXIT_BAD_INPUT and "unknown series" in err


def test_sensitivity_lists_parts(capsys) -> None:
    code, data, _ = _run(capsys, "sensitivity", str(sample_paths()[0]))
    assert code == 0 and {"L", "C1", "C2"} <= {row["part"] for row in data}


def test_spread_prints_yield_and_percentiles(capsys) -> None:
    code, data, _ = _run(
        capsys, "spread", str(sample_paths()[0]), "--samples", "200", "--seed", "4",
        "--window", "100k", "20M",
    )  # fmt: skip
    assert code == 0
    s = data["spread"]
    assert s["samples"] == 200 and s["seed"] == 4
    assert set(s["f_osc"]) == {"p1", "p5", "p50", "p95", "p99"}
    assert 0 <= s["yield_start"] <= 1 and s["in_window"] is not None
    assert s["sensitivities"] and s["worst_cases"]
    code, _, err = _run(capsys, "spread", str(sample_paths()[0]), "--samples", "0")
    assert code == EXIT_BAD_INPUT and "samples must be between" in err


def test_synthesize_prints_a_design_with_reasons(capsys) -> None:
    code, data, err = _run(
        capsys, "synthesize", "--topology", "common-emitter", "--f", "1M", "--Vcc", "12",
        "--IC", "1m", "--gain", "3",
    )  # fmt: skip
    assert code == 0 and data["topology"] == "common-emitter"
    assert "RE =" in err and "C1/C2" in err
    code, _, err = _run(capsys, "synthesize", "--f", "1M", "--Vcc", "1", "--IC", "1m")
    assert code == EXIT_BAD_INPUT and "headroom" in err


def test_reconcile_prints_the_fit(capsys) -> None:
    code, data, _ = _run(capsys, "reconcile", str(sample_paths()[0]), "--f-measured", "1.0M")
    assert code == 0 and data["as_built"]["format"] == "ringwise.design"
    assert {f["name"] for f in data["fitted"]} == {"C_scale", "Q_L", "beta"}
    code, _, err = _run(
        capsys, "reconcile", str(sample_paths()[0]), "--f-measured", "1M", "--threshold", "RC"
    )
    assert code == EXIT_BAD_INPUT and "PART=VALUE" in err
