"""A real heatpath server for client, command-line and README tests: gunicorn on a loopback port.

One server per test session (``live_server`` fixture, registered in conftest.py): gunicorn with
the project's config serving the app plus the test ``count`` endpoint
(tests/service/team_support.py), two HTTP workers, one job worker, a private SQLite store in a
temporary directory, bound to 127.0.0.1 on a free port. Only loopback traffic.
"""

from __future__ import annotations

import contextlib
import os
import signal
import subprocess
import sys
import tempfile
import time
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import pytest
import requests

from service import create_app
from tests.service.test_gunicorn_server import free_port

REPO = Path(__file__).resolve().parents[2]
APP_SPEC = "tests.service.team_support:create_app()"
START_TIMEOUT_S = 90.0


@dataclass
class LiveServer:
    url: str
    port: int
    store_dir: Path
    proc: subprocess.Popen

    @property
    def log(self) -> str:
        path = self.store_dir / "server.log"
        return path.read_text(errors="replace") if path.exists() else ""


def _wait_ready(url: str, proc: subprocess.Popen, log_path: Path) -> None:
    deadline = time.monotonic() + START_TIMEOUT_S
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            pytest.fail(f"server exited ({proc.returncode}): {log_path.read_text(errors='replace')[-3000:]}")
        with contextlib.suppress(requests.RequestException, ValueError):
            body = requests.get(f"{url}/v1/ready", timeout=2).json()
            if body.get("job_workers_seen", 0) >= 1:
                return
        time.sleep(0.2)
    pytest.fail(f"server at {url} was not ready within {START_TIMEOUT_S} s")


@contextlib.contextmanager
def serve(extra_env: dict[str, str] | None = None) -> Iterator[LiveServer]:
    """Run gunicorn until the block ends (SIGTERM, then SIGKILL after 40 s)."""
    port = free_port()
    url = f"http://127.0.0.1:{port}"
    with tempfile.TemporaryDirectory(prefix="heatpath-live-") as tmp:
        store_dir = Path(tmp)
        env = {**os.environ, "HEATPATH_BIND": f"127.0.0.1:{port}", "HEATPATH_WORKERS": "2",
               "HEATPATH_JOB_WORKERS": "1", "HEATPATH_JOB_STALL_S": "2",
               "HEATPATH_STORE": str(store_dir / "store.sqlite3"),
               "OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1", **(extra_env or {})}
        for name in ("PROMETHEUS_MULTIPROC_DIR", "HEATPATH_URL", "HEATPATH_KEY"):
            env.pop(name, None)
        log_path = store_dir / "server.log"
        command = [sys.executable, "-m", "gunicorn", "--config", "service/gunicorn_conf.py", APP_SPEC]
        with log_path.open("ab") as log, subprocess.Popen(command, cwd=REPO, env=env, stdout=log,
                                                          stderr=subprocess.STDOUT) as proc:
            try:
                _wait_ready(url, proc, log_path)
                yield LiveServer(url, port, store_dir, proc)
            finally:
                proc.send_signal(signal.SIGTERM)
                try:
                    proc.wait(timeout=40)
                except subprocess.TimeoutExpired:
                    proc.kill()
                    proc.wait()


@pytest.fixture(scope="session")
def live_server() -> Iterator[LiveServer]:
    with serve() as server:
        yield server


def app_has_route(path: str) -> bool:
    """True if the heatpath app (not the test additions) serves ``path``."""
    return any(rule.rule == path for rule in create_app({"TESTING": True}).url_map.iter_rules())


def requires_route(path: str) -> pytest.MarkDecorator:
    """Skip a test until the app serves ``path`` (endpoints added by other work land later)."""
    return pytest.mark.skipif(not app_has_route(path), reason=f"the app has no {path} route yet (issue 7 endpoint); "
                                                              "this test runs once it exists")
