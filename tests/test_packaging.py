"""The built wheel serves the sheet: built from the checkout, installed outside it.

The wheel is built without a package index (``--no-build-isolation``, with
the setuptools of the test environment) and installed without its
dependencies into a fresh virtual environment in a temporary folder; that
environment sees the runtime dependencies of the test environment through a
``.pth`` line, so the test needs no network.  Every requirement the wheel
declares is checked against those installed distributions, then
``ringwise serve`` is started from another folder and the sheet, a static
asset and a sample design are fetched over HTTP.
"""

from __future__ import annotations

import json
import re
import shutil
import socket
import subprocess
import sys
import sysconfig
import time
import zipfile
from collections.abc import Iterator
from pathlib import Path

import httpx2
import pytest

import ringwise

ROOT = Path(__file__).resolve().parents[1]
#: What the build reads from the checkout (the rest, tests included, stays out).
SOURCES = ("pyproject.toml", "README.md", "LICENSE", "app", "templates", "static", "sample_designs")
#: Seconds the installed server may take to answer its first request.
START_TIMEOUT = 60.0


def _run(*command: str | Path, cwd: Path) -> subprocess.CompletedProcess[str]:
    done = subprocess.run(
        [str(c) for c in command], cwd=cwd, capture_output=True, text=True, check=False
    )
    assert done.returncode == 0, f"{command} failed:\n{done.stdout}\n{done.stderr}"
    return done


@pytest.fixture(scope="module")
def wheel(tmp_path_factory: pytest.TempPathFactory) -> Path:
    work = tmp_path_factory.mktemp("build")
    source = work / "source"
    source.mkdir()
    for name in SOURCES:
        path = ROOT / name
        if path.is_dir():
            shutil.copytree(path, source / name, ignore=shutil.ignore_patterns("__pycache__"))
        else:
            shutil.copy2(path, source / name)
    _run(
        sys.executable, "-m", "pip", "wheel", "--quiet", "--no-deps", "--no-build-isolation",
        "--no-index", "--wheel-dir", work / "dist", ".",
        cwd=source,
    )  # fmt: skip
    (found,) = (work / "dist").glob("ringwise-*.whl")
    return found


@pytest.fixture(scope="module")
def installed(wheel: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A fresh virtual environment with the wheel installed; returns its bin folder."""
    env = tmp_path_factory.mktemp("env") / "venv"
    _run(sys.executable, "-m", "venv", "--without-pip", env, cwd=env.parent)
    python = env / "bin" / "python"
    _run(
        sys.executable, "-m", "pip", "--python", python, "install", "--quiet", "--no-deps",
        "--no-index", wheel,
        cwd=env.parent,
    )  # fmt: skip
    # the runtime dependencies, from the test environment's site-packages
    own = _run(python, "-c", "import sysconfig; print(sysconfig.get_path('purelib'))", cwd=env)
    Path(own.stdout.strip(), "_test_dependencies.pth").write_text(
        sysconfig.get_path("purelib") + "\n", encoding="utf-8"
    )
    return env / "bin"


def test_the_wheel_holds_the_package_data(wheel: Path) -> None:
    names = set(zipfile.ZipFile(wheel).namelist())
    for sample in (ROOT / "sample_designs").glob("*.json"):
        assert f"ringwise/sample_designs/{sample.name}" in names
    for template in (ROOT / "templates").glob("*.html"):
        assert f"ringwise/templates/{template.name}" in names
    for asset in ("sheet.js", "ringwise.css", "icon.svg"):
        assert f"ringwise/static/{asset}" in names
    assert "ringwise/py.typed" in names
    assert f"ringwise-{ringwise.__version__}.dist-info/licenses/LICENSE" in names
    assert not any(name.startswith(("app/", "tests/")) for name in names)


def test_the_metadata_names_the_license_and_every_requirement_is_met(installed: Path) -> None:
    # Core metadata 2.4 (PEP 639): an SPDX expression in License-Expression
    check = (
        "import importlib.metadata as m\n"
        "from packaging.requirements import Requirement\n"
        "meta = m.metadata('ringwise')\n"
        "print(meta['License-Expression'])\n"
        "for text in m.requires('ringwise'):\n"
        "    req = Requirement(text)\n"
        "    if req.marker is None or req.marker.evaluate({'extra': ''}):\n"
        "        have = m.version(req.name)\n"
        "        assert req.specifier.contains(have, prereleases=True), (text, have)\n"
        "print(m.version('ringwise'))\n"
    )
    done = _run(installed / "python", "-c", check, cwd=installed)
    assert done.stdout.split() == ["MIT", ringwise.__version__]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def served(installed: Path, tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """``ringwise serve`` of the installed wheel, started from an unrelated folder
    that has an ``app/`` of its own (the old import name must not matter)."""
    elsewhere = tmp_path_factory.mktemp("elsewhere")
    (elsewhere / "app").mkdir()
    (elsewhere / "app" / "__init__.py").write_text("raise ImportError('wrong app')\n")
    port = _free_port()
    server = subprocess.Popen(
        [installed / "ringwise", "serve", "--port", str(port)],
        cwd=elsewhere,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    url = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + START_TIMEOUT
    try:
        while True:
            if server.poll() is not None:
                out, err = server.communicate()
                pytest.fail(f"ringwise serve exited with {server.returncode}:\n{out}\n{err}")
            try:
                httpx2.get(f"{url}/api/designs", timeout=1.0)
                break
            except httpx2.TransportError:
                if time.monotonic() > deadline:
                    pytest.fail("the installed ringwise serve did not answer")
                time.sleep(0.2)
        yield url
    finally:
        server.terminate()
        server.communicate(timeout=10)


def test_the_installed_server_serves_sheet_asset_and_sample(served: str) -> None:
    with httpx2.Client(base_url=served, timeout=30) as client:
        sheet = client.get("/")
        assert sheet.status_code == 200
        assert "ringwise" in sheet.text
        script = re.search(r'src="(/static/sheet\.js\?v=[0-9a-f]+)"', sheet.text)
        assert script is not None
        asset = client.get(script.group(1))
        assert asset.status_code == 200
        assert asset.content == (ROOT / "static" / "sheet.js").read_bytes()
        sample = client.get("/api/designs/clapp-clock-1M")
        assert sample.status_code == 200
        expected = json.loads((ROOT / "sample_designs" / "clapp-clock-1M.json").read_text())
        assert sample.json()["topology"] == expected["topology"]
        docs = client.get("/docs")
        assert docs.status_code == 200
        bundle = re.search(r'src="(/vendor/swagger-ui-[^"]+)"', docs.text)
        assert bundle is not None and client.get(bundle.group(1)).status_code == 200


def test_the_installed_command_line_runs_from_elsewhere(installed: Path, tmp_path: Path) -> None:
    done = _run(installed / "ringwise", "--version", cwd=tmp_path)
    assert done.stdout.strip() == f"ringwise {ringwise.__version__}"
