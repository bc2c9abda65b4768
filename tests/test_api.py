"""The public API (load, analyze, spread, simulate, bill_of_materials) and notebook tables."""

from __future__ import annotations

import json
import subprocess
import sys

import ringwise
from ringwise.cli import main
from tests.conftest import sample_paths


def test_import_is_light() -> None:
    code = "import sys, ringwise; print(sorted({'numpy', 'scipy', 'pydantic'} & set(sys.modules)))"
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert done.stdout.strip() == "[]"


def test_the_readme_example_gives_what_the_cli_prints(capsys) -> None:
    path = sample_paths()[0]
    design = ringwise.load(path)
    result = ringwise.analyze(design)
    main(["analyze", str(path)])
    assert result.model_dump(mode="json") == json.loads(capsys.readouterr().out)
    assert ringwise.load(json.loads(path.read_text())) == design


def test_spread_simulate_bom() -> None:
    design = ringwise.load(sample_paths()[0])
    assert ringwise.spread(design, samples=30).spread.samples == 30
    assert ringwise.simulate(design, cycles=30, points=200).transient.cycles_run >= 30
    assert {line.reference for line in ringwise.bill_of_materials(design)} >= {"L", "C1", "C2"}
    steady = ringwise.steady_state(design)
    assert steady.f is not None and steady.f > 0 and steady.parts


def test_results_show_as_html_tables() -> None:
    result = ringwise.analyze(ringwise.load(sample_paths()[0]))
    html = result._repr_html_()
    assert html.startswith("<table>") and "loop.f_osc" in html and " kHz" in html
    assert "<script" not in html
