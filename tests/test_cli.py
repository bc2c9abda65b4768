"""The command line: same JSON as the API, exit code 2 on bad input."""

from __future__ import annotations

import argparse
import csv
import fcntl
import io
import json
import math
import os
import pty
import re
import select
import signal
import struct
import subprocess
import sys
import termios
import time
from pathlib import Path

import pytest

import ringwise
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


def test_snap_can_keep_the_frequency(capsys) -> None:
    code, data, err = _run(
        capsys, "snap", str(sample_paths()[0]), "--series", "E6", "--keep-frequency"
    )
    assert code == 0 and data["format"] == "ringwise.design"
    assert "trimmed from" in err or "cannot be trimmed" in err


def test_synthesize_keeps_q_load_and_offers_clapp(capsys) -> None:
    code, data, err = _run(
        capsys, "synthesize", "--topology", "common-emitter", "--f", "7M", "--Vcc", "12",
        "--IC", "2m", "--Q_L", "100", "--R_load", "10k", "--preset", "rf", "--clapp",
    )  # fmt: skip
    assert code == 0
    assert data["tank"]["Q_L"] == 100 and data["load"]["R_load"] == 10e3
    assert data["tank"]["C3"] is not None and data["device"]["preset"] == "rf"
    assert "In standard values f_osc" in err
    code, _, err = _run(
        capsys, "synthesize", "--topology", "common-collector", "--f", "30M", "--Vcc", "12",
        "--IC", "5m",
    )  # fmt: skip
    assert code == EXIT_BAD_INPUT and "below 50 nH" in err


def test_reconcile_prints_the_fit(capsys) -> None:
    code, data, _ = _run(capsys, "reconcile", str(sample_paths()[0]), "--f-measured", "1.0M")
    assert code == 0 and data["as_built"]["format"] == "ringwise.design"
    assert {f["name"] for f in data["fitted"]} == {"C_scale", "Q_L", "beta"}
    code, _, err = _run(
        capsys, "reconcile", str(sample_paths()[0]), "--f-measured", "1M", "--threshold", "RC"
    )
    assert code == EXIT_BAD_INPUT and "PART=VALUE" in err


# --- conventions: version, stdin, pipes, Ctrl-C, formats, lazy imports ---------

RINGWISE = [sys.executable, "-m", "ringwise.cli"]


def _cli(*argv: str, stdin: bytes | None = None, **kw) -> subprocess.CompletedProcess[bytes]:
    return subprocess.run([*RINGWISE, *argv], input=stdin, capture_output=True, check=False, **kw)


def test_version(capsys) -> None:
    with pytest.raises(SystemExit) as done:
        main(["--version"])
    assert done.value.code == 0
    assert capsys.readouterr().out.strip() == f"ringwise {ringwise.__version__}"


def test_help_imports_no_numerical_stack() -> None:
    # --help answers at once because the parser imports only the standard library
    code = (
        "import sys\nfrom ringwise.cli import main\n"
        "try:\n    main(['analyze', '--help'])\nexcept SystemExit:\n    pass\n"
        "heavy = {'numpy', 'scipy', 'pydantic', 'fastapi'} & set(sys.modules)\n"
        "print(sorted(heavy), file=sys.stderr)\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert done.stderr.strip() == "[]"


def test_every_argument_has_help() -> None:
    from ringwise.cli import parser

    top = parser()
    (sub,) = (a for a in top._actions if isinstance(a, argparse._SubParsersAction))
    for name, command in sub.choices.items():
        for action in command._actions:
            assert action.help, f"{name} {action.dest} has no help text"


def test_stdin_equals_the_file() -> None:
    path = sample_paths()[0]
    from_file = _cli("analyze", str(path))
    from_stdin = _cli("analyze", "-", stdin=path.read_bytes())
    assert from_file.returncode == from_stdin.returncode == 0
    assert from_stdin.stdout == from_file.stdout


def test_a_byte_order_mark_is_accepted_by_both_cli_and_api() -> None:
    from fastapi.testclient import TestClient

    from ringwise.analysis import analyze, periodic
    from ringwise.web.server import create_app

    # the CLI starts cold in a fresh process; start this process's answer cold too
    # (a remembered orbit from earlier tests is a different start for the steady state)
    analyze.forget()
    periodic.forget()
    with_bom = b"\xef\xbb\xbf" + sample_paths()[0].read_bytes()
    done = _cli("analyze", "-", stdin=with_bom)
    assert done.returncode == 0, done.stderr
    with TestClient(create_app(), base_url="http://127.0.0.1") as client:  # a loopback Host
        answer = client.post(
            "/api/analyze", content=with_bom, headers={"content-type": "application/json"}
        )
    assert answer.status_code == 200
    # the same answer; the steady state starts from the last orbit this process solved,
    # so figures may differ in their last digits between two processes
    _assert_same_json(answer.json(), json.loads(done.stdout))


def _assert_same_json(a, b, path: str = "") -> None:
    if isinstance(a, dict):
        assert isinstance(b, dict) and a.keys() == b.keys(), path
        for k in a:
            _assert_same_json(a[k], b[k], f"{path}.{k}")
    elif isinstance(a, list):
        assert isinstance(b, list) and len(a) == len(b), path
        for i, (x, y) in enumerate(zip(a, b, strict=True)):
            _assert_same_json(x, y, f"{path}[{i}]")
    elif isinstance(a, float) and isinstance(b, float | int):
        assert b == pytest.approx(a, rel=1e-6, abs=1e-12), path
    else:
        assert a == b, path


def test_progress_bar_only_on_a_terminal() -> None:
    argv = ["simulate", str(sample_paths()[0]), "--cycles", "200"]
    piped = _cli(*argv)
    assert piped.returncode == 0 and piped.stderr == b""  # silent when not a terminal
    proc, main_fd = _on_a_terminal(argv)
    try:
        seen = _read_terminal(main_fd)
    finally:
        os.close(main_fd)
    out, _ = proc.communicate(timeout=300)
    assert proc.returncode == 0
    assert b"simulate" in seen and b"%" in seen  # tqdm's bar, on stderr
    assert json.loads(out)["format"] == "ringwise.simulation"


def test_a_closed_pipe_ends_quietly() -> None:
    # ringwise analyze FILE | head -1
    proc = subprocess.Popen(
        [*RINGWISE, "analyze", str(sample_paths()[0])],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
    )
    assert proc.stdout is not None and proc.stderr is not None
    proc.stdout.readline()
    proc.stdout.close()
    err = proc.stderr.read()
    proc.stderr.close()
    assert proc.wait(timeout=120) == 0
    assert b"Traceback" not in err and err == b""


def _on_a_terminal(argv: list[str]) -> tuple[subprocess.Popen, int]:
    """The CLI with its standard error on a pseudo-terminal; returns it and the
    terminal's reading end."""
    main_fd, tty_fd = pty.openpty()
    # a new pseudo-terminal is 0 columns wide (tqdm draws nothing in that); make it 100x30
    fcntl.ioctl(tty_fd, termios.TIOCSWINSZ, struct.pack("HHHH", 30, 100, 0, 0))
    # a shell's background job starts with SIGINT ignored, and Python then never turns
    # Ctrl-C into KeyboardInterrupt: give the child the default, as a terminal user has
    proc = subprocess.Popen(
        [*RINGWISE, *argv],
        stdout=subprocess.PIPE,
        stderr=tty_fd,
        preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL),
    )
    os.close(tty_fd)  # the child holds the terminal now
    return proc, main_fd


def _read_terminal(main_fd: int, until: bytes | None = None, timeout: float = 300) -> bytes:
    """What the child drew, until ``until`` appears or it closes the terminal."""
    seen = b""
    deadline = time.monotonic() + timeout
    while until is None or until not in seen:
        ready, _, _ = select.select([main_fd], [], [], max(0.0, deadline - time.monotonic()))
        if not ready:
            break
        try:
            chunk = os.read(main_fd, 4096)
        except OSError:  # EIO: the child closed its end of the terminal
            break
        if not chunk:
            break
        seen += chunk
    return seen


def test_ctrl_c_ends_quietly() -> None:
    proc, main_fd = _on_a_terminal(["simulate", str(sample_paths()[0]), "--cycles", "20000"])
    try:
        started = _read_terminal(main_fd, until=b"simulate")
        assert b"simulate" in started  # the run is under way (its progress bar shows)
        proc.send_signal(signal.SIGINT)
        rest = _read_terminal(main_fd)
    finally:
        os.close(main_fd)
    out, _ = proc.communicate(timeout=120)
    assert proc.returncode == 128 + signal.SIGINT
    assert b"Traceback" not in started + rest and out == b""


@pytest.mark.parametrize(
    ("content", "needle"),
    [
        (b"\xff\xfe{\x00", "is not UTF-8 text"),
        ('{"name": "caf\xe9"}'.encode("latin-1"), "is not UTF-8 text"),
        (b"[" * 100_000 + b"]" * 100_000, "is over 65536 bytes"),
        (b"[" * 30_000 + b"]" * 30_000, "nested too deeply"),
        (b'{"tank": {"C2": ' + b"9" * 5000 + b"}}", "is not a design file"),
        (b'{"name": "' + b"x" * 60_000 + b'"}', "is not a valid design"),
    ],
    ids=["binary", "latin-1", "huge", "deep", "long-integer", "long-name"],
)
def test_bad_files_end_in_one_short_message(tmp_path: Path, content: bytes, needle: str) -> None:
    bad = tmp_path / "bad.json"
    bad.write_bytes(content)
    done = _cli("analyze", str(bad))
    err = done.stderr.decode()
    assert done.returncode == EXIT_BAD_INPUT, err
    assert needle in err and "Traceback" not in err
    assert all(len(line) <= 300 for line in err.splitlines())
    assert len(err) < 4000


def test_dev_zero_is_refused() -> None:
    done = _cli("analyze", "/dev/zero")
    assert done.returncode == EXIT_BAD_INPUT
    assert b"is over 65536 bytes" in done.stderr and b"Traceback" not in done.stderr


@pytest.mark.parametrize(
    ("argv", "needle"),
    [
        (["spread", "{sample}", "--seed", "-1"], "--seed must be 0"),
        (["serve", "--port", "99999"], "--port must be 1 … 65535"),
        (["simulate", "{sample}", "--cycles", "nan"], "not a finite number"),
    ],
)
def test_bad_numbers_are_refused_by_the_parser(argv: list[str], needle: str) -> None:
    argv = [a.replace("{sample}", str(sample_paths()[0])) for a in argv]
    done = _cli(*argv)
    assert done.returncode == EXIT_BAD_INPUT
    assert needle in done.stderr.decode() and b"Traceback" not in done.stderr


def test_table_uses_the_sheets_labels_and_engineering_units(capsys) -> None:
    from ringwise.web.view import SHOWN

    code = main(["analyze", str(sample_paths()[0]), "--format", "table"])
    out = capsys.readouterr().out
    assert code == 0
    for _path, _unit, label, _panel in SHOWN:
        if _unit != "valid":
            assert label in out
    assert re.search(r"Oscillation frequency \(zero loop phase\)\s+\d+(\.\d+)? kHz", out)


def test_analyze_csv_figures_parse_back_to_the_result(capsys) -> None:
    path = str(sample_paths()[0])
    main(["analyze", path])
    result = json.loads(capsys.readouterr().out)
    main(["analyze", path, "--format", "csv"])
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert rows
    by_path = {r["path"]: r["value"] for r in rows}
    assert float(by_path["loop.f_osc"]) == result["loop"]["f_osc"]
    assert float(by_path["operating_point.IC"]) == result["operating_point"]["IC"]


def test_sweep_csv_parses_back_to_the_json(capsys) -> None:
    argv = ["sweep", str(sample_paths()[0]), "--param", "RC", "--from", "100", "--to", "2k"]
    main([*argv, "--points", "7"])
    data = json.loads(capsys.readouterr().out)
    main([*argv, "--points", "7", "--format", "csv"])
    rows = list(csv.reader(io.StringIO(capsys.readouterr().out)))
    assert rows[0][:3] == ["RC [SI]", "f_osc [Hz]", "loop gain"]
    assert [float(r[0]) for r in rows[1:]] == data["values"]
    assert [float(r[1]) if r[1] else None for r in rows[1:]] == data["f_osc"]
    assert [float(r[2]) if r[2] else None for r in rows[1:]] == data["gain"]


def test_serve_refuses_a_bad_design_file_in_one_line(tmp_path: Path) -> None:
    bad = tmp_path / "mine.json"
    bad.write_text('{"topology": "common-emitter"}')
    done = _cli("serve", str(bad), "--port", "1")
    assert done.returncode == EXIT_BAD_INPUT
    assert b"is not a valid design" in done.stderr and b"Traceback" not in done.stderr


def test_preset_names_agree_with_the_presets() -> None:
    from ringwise.cli import PRESET_NAMES
    from ringwise.presets import DEVICE_PRESETS

    assert tuple(sorted(DEVICE_PRESETS)) == PRESET_NAMES
