"""The README's walk-through works as printed: its curl, Python and heatpath commands run against a live server.

The commands are taken from the fenced ``sh`` and ``python`` blocks of the "Walk-through"
section, the address http://127.0.0.1:8000 replaced by the test server's loopback port, and run
from a scratch directory holding the examples (so files they write land there). A command
for an endpoint the app does not serve yet is skipped, naming it.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from tests.service.live_server import app_has_route

REPO = Path(__file__).resolve().parents[2]
README = REPO / "README.md"
DEFAULT_ADDRESS = "127.0.0.1:8000"
COMMAND_ROUTES = {"point": "/v1/equilibrium", "cool": "/v1/cooling-paths", "isentrope": "/v1/isentropes",
                  "table": "/v1/tables", "datasets": "/v1/datasets"}


def walkthrough() -> str:
    text = README.read_text(encoding="utf-8")
    start = text.index("## Walk-through")
    end = text.find("\n## ", start + 1)
    return text[start:end if end > 0 else None]


def examples() -> list[tuple[str, str]]:
    """(kind, code) of every command in the walk-through: kind is 'curl', 'heatpath' or 'python'."""
    out = []
    for lang, code in re.findall(r"```(sh|python)\n(.*?)```", walkthrough(), flags=re.S):
        if lang == "python":
            out.append(("python", code))
            continue
        for line in code.splitlines():
            if line.strip() and not line.lstrip().startswith("#"):
                out.append(("curl" if line.startswith("curl ") else "heatpath", line.strip()))
    return out


EXAMPLES = examples()


def test_quick_start_still_opens_with_the_two_commands():
    text = README.read_text(encoding="utf-8")
    block = text[text.index("## Quick start"):]
    assert re.search(r"```\n\./run-service\n\./run-tests\n```", block)


def test_the_walkthrough_has_each_kind_of_example_and_a_figure_and_the_caveats():
    kinds = {kind for kind, _ in EXAMPLES}
    assert kinds == {"curl", "python", "heatpath"}
    section = walkthrough()
    figure = re.search(r"!\[[^\]]+\]\((docs/[^)]+\.(?:svg|png))\)", section)
    assert figure and (REPO / figure.group(1)).is_file()
    flat = " ".join(section.split())
    for phrase in ("model estimates", "validity domain", "uncertainties", "not a substitute for experiments",
                   "safety design of furnaces", "licensed engineering practice", "invented"):
        assert phrase in flat, phrase


def required_route(kind: str, code: str) -> str | None:
    if kind == "curl":
        match = re.search(r"/v1/[\w/-]+", code)
        return match.group(0) if match else None
    if kind == "heatpath":
        return COMMAND_ROUTES.get(code.split()[1])
    return "/v1/equilibrium" if "equilibrium(" in code else None


@pytest.mark.slow  # a subprocess per example, against the session's live server
@pytest.mark.parametrize(("kind", "code"), EXAMPLES, ids=[f"{k}-{i}" for i, (k, _) in enumerate(EXAMPLES)])
def test_readme_example_runs_against_a_live_server(live_server, tmp_path, kind, code):
    route = required_route(kind, code)
    if route and not app_has_route(route):
        pytest.skip(f"the app has no {route} yet; this README example runs once it exists")
    code = code.replace(DEFAULT_ADDRESS, f"127.0.0.1:{live_server.port}")
    shutil.copytree(REPO / "examples", tmp_path / "examples")
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    env.pop("HEATPATH_URL", None)
    if kind == "python":
        run = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, env=env, capture_output=True, text=True,
                             timeout=300)
    else:
        code = code.replace(".venv/bin/", f"{Path(sys.executable).parent}/")
        run = subprocess.run(["bash", "-c", code], cwd=tmp_path, env=env, capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stderr[-3000:]
    if kind == "curl":
        body = json.loads(run.stdout)
        assert body["phases"] and body["provenance"]["dataset_id"]
    elif kind == "python":
        assert "dataset" in run.stdout and "wt%" in run.stdout
    else:
        assert run.stdout.strip()
        for written in re.findall(r"--(?:plot|netcdf) (\S+)", code):
            assert (tmp_path / written).stat().st_size > 1000, written
