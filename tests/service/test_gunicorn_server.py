"""The real server: gunicorn with service/gunicorn_conf.py, queried over loopback HTTP.

Starts gunicorn as a subprocess on a free 127.0.0.1 port (only loopback traffic), waits for
/v1/health, makes a few requests with ``requests`` and stops it with SIGTERM.
"""

from __future__ import annotations

import contextlib
import os
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path

import pytest
import requests

REPO = Path(__file__).resolve().parents[2]
DATASET_ID = "heatpath-ncfmas-2026a"
START_TIMEOUT_S = 60.0


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def wait_until_healthy(session: requests.Session, base: str, proc: subprocess.Popen) -> None:
    deadline = time.monotonic() + START_TIMEOUT_S
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            pytest.fail(f"server exited with status {proc.returncode} before answering")
        with contextlib.suppress(requests.ConnectionError):
            if session.get(f"{base}/v1/health", timeout=2).status_code == 200:
                return
        time.sleep(0.2)
    pytest.fail(f"server did not answer /v1/health within {START_TIMEOUT_S} s")


@contextlib.contextmanager
def running_server(command: list[str], env: dict[str, str], base: str) -> Iterator[requests.Session]:
    """Run ``command`` until the block ends; yields a session once /v1/health answers."""
    with subprocess.Popen(command, cwd=REPO, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE) as proc:
        try:
            with requests.Session() as session:
                wait_until_healthy(session, base, proc)
                yield session
        finally:
            proc.send_signal(signal.SIGTERM)
            try:
                _, stderr = proc.communicate(timeout=40)
            except subprocess.TimeoutExpired:
                proc.kill()
                _, stderr = proc.communicate()
    assert proc.returncode == 0, stderr.decode(errors="replace")[-2000:]


def server_env(port: int) -> dict[str, str]:
    return {**os.environ, "HEATPATH_BIND": f"127.0.0.1:{port}", "HEATPATH_WORKERS": "2",
            "OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}


def exercise(session: requests.Session, base: str) -> None:
    health = session.get(f"{base}/v1/health", timeout=10)
    assert health.json()["status"] == "ok"
    datasets = session.get(f"{base}/v1/datasets", timeout=10).json()["datasets"]
    assert DATASET_ID in [d["id"] for d in datasets]
    url = f"{base}/v1/datasets/{DATASET_ID}/endmembers/forsterite"
    ok = session.get(url, params={"pressure_gpa": 3, "temperature_k": 1500}, timeout=30)
    assert ok.status_code == 200 and ok.headers["Content-Type"] == "application/json"
    assert ok.json()["provenance"]["dataset_id"] == DATASET_ID
    bad = session.get(url, params={"pressure_gpa": "nan", "temperature_k": 1500}, timeout=30)
    assert bad.status_code == 422 and bad.headers["Content-Type"] == "application/problem+json"
    assert bad.json()["errors"][0]["field"] == "pressure_gpa"
    assert session.delete(f"{base}/v1/datasets", timeout=10).status_code == 405
    assert session.get(f"{base}/v1/nothing", timeout=10).status_code == 404


def test_gunicorn_with_the_project_config_serves_the_api():
    port = free_port()
    base = f"http://127.0.0.1:{port}"
    command = [sys.executable, "-m", "gunicorn", "--config", "service/gunicorn_conf.py", "service:create_app()"]
    with running_server(command, server_env(port), base) as session:
        exercise(session, base)


def test_heatpath_serve_command_serves_the_api():
    port = free_port()
    base = f"http://127.0.0.1:{port}"
    command = [sys.executable, "-m", "service.cli", "serve", "--bind", f"127.0.0.1:{port}", "--workers", "1"]
    with running_server(command, {**os.environ}, base) as session:
        exercise(session, base)
