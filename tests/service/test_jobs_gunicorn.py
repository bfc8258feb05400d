"""Jobs on a real gunicorn with its job worker, on loopback: progress, cancel, SIGKILL, restarts, two servers.

Each server is ``gunicorn --config service/gunicorn_conf.py`` serving the app plus the test
``count`` endpoint (tests/service/team_support.py), with a private SQLite store in a temporary
directory; the master starts the job worker process as in the default setup.
"""

from __future__ import annotations

import contextlib
import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path

import pytest
import requests

from tests.service.team_support import COUNT_URL, count_squares, make_app
from tests.service.test_gunicorn_server import free_port

REPO = Path(__file__).resolve().parents[2]
APP_SPEC = "tests.service.team_support:create_app()"
pytestmark = pytest.mark.slow  # ~2 min in all: each test starts one or more real servers


class Server:
    def __init__(self, proc: subprocess.Popen, base: str, log_path: Path) -> None:
        self.proc, self.base, self.log_path = proc, base, log_path
        self.session = requests.Session()

    def get(self, path: str, **kw):
        return self.session.get(self.base + path, timeout=20, **kw)

    def post(self, path: str, **kw):
        return self.session.post(self.base + path, timeout=60, **kw)

    def delete(self, path: str, **kw):
        return self.session.delete(self.base + path, timeout=20, **kw)


@contextlib.contextmanager
def serve(store_dir: Path, job_workers: int = 1, **env: str) -> Iterator[Server]:
    port = free_port()
    environment = {**os.environ, "HEATPATH_BIND": f"127.0.0.1:{port}", "HEATPATH_WORKERS": "2",
                   "HEATPATH_STORE": str(store_dir / "store.sqlite3"), "HEATPATH_JOB_WORKERS": str(job_workers),
                   "HEATPATH_JOB_STALL_S": "2", "OPENBLAS_NUM_THREADS": "1", **env}
    environment.pop("PROMETHEUS_MULTIPROC_DIR", None)
    log_path = store_dir / f"server-{port}.log"
    command = [sys.executable, "-m", "gunicorn", "--config", "service/gunicorn_conf.py", APP_SPEC]
    with log_path.open("ab") as log, subprocess.Popen(command, cwd=REPO, env=environment, stdout=log,
                                                      stderr=subprocess.STDOUT) as proc:
        server = Server(proc, f"http://127.0.0.1:{port}", log_path)
        try:
            wait_for(lambda: _ready(server, job_workers), 60, "server ready")
            yield server
        finally:
            server.session.close()
            proc.send_signal(signal.SIGTERM)
            try:
                proc.wait(timeout=60)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()


def _ready(server: Server, job_workers: int) -> bool:
    if server.proc.poll() is not None:
        pytest.fail(f"server exited: {server.log_path.read_text()[-3000:]}")
    with contextlib.suppress(requests.ConnectionError):
        body = server.get("/v1/ready").json()
        return body.get("job_workers_seen", 0) >= job_workers
    return False


def wait_for(predicate, timeout_s: float, what: str, interval: float = 0.1):
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        value = predicate()
        if value:
            return value
        time.sleep(interval)
    pytest.fail(f"timed out after {timeout_s} s waiting for {what}")


def submit(server: Server, **body) -> str:
    response = server.post(COUNT_URL, json={**body, "async": True})
    assert response.status_code == 202, response.text
    return response.headers["Location"]


def state_of(server: Server, location: str) -> dict:
    response = server.get(location)
    assert response.status_code == 200, response.text
    return response.json()


def finished(server: Server, location: str, timeout_s: float = 60) -> dict:
    return wait_for(lambda: (v := state_of(server, location))["state"] in ("succeeded", "failed", "cancelled") and v,
                    timeout_s, f"{location} to finish", 0.2)


def worker_pid(store_dir: Path, job_id: str) -> int:
    with sqlite3.connect(store_dir / "store.sqlite3") as db:
        doc = json.loads(db.execute("SELECT doc FROM hp_docs WHERE kind = 'job' AND id = ?", (job_id,)).fetchone()[0])
    return int(doc["worker"].rsplit(":", 1)[1])


def test_submit_poll_progress_and_fetch_a_result_equal_to_the_synchronous_answer(tmp_path):
    with serve(tmp_path) as server:
        location = submit(server, points=20, delay_s=0.1)
        seen = wait_for(lambda: (v := state_of(server, location))["state"] == "running"
                        and 0 < v["progress"]["points_done"] < 20 and v, 30, "progress while running")
        assert 0 < seen["progress"]["fraction"] < 1 and seen["progress"]["points_total"] == 20
        assert seen["progress"]["elapsed_s"] > 0 and seen["progress"]["remaining_estimate_s"] > 0
        done = finished(server, location)
        assert done["state"] == "succeeded", done
        result = server.get(done["links"]["result"])
        sync = make_app(tmp_path / "in-process").test_client().post(COUNT_URL, json={"points": 20, "delay_s": 0.1})
        assert result.content == sync.get_data() and result.headers["ETag"] == sync.headers["ETag"]
        assert result.json() == count_squares({"points": 20}, lambda *_: None)
        metrics = server.get("/metrics").text
        solver = [line for line in metrics.splitlines() if line.startswith("heatpath_solver_seconds_count")]
        assert any('mode="job"' in line and line.endswith(" 1.0") for line in solver), solver


def test_cancel_a_running_job(tmp_path):
    with serve(tmp_path) as server:
        location = submit(server, points=200, delay_s=0.05)
        wait_for(lambda: state_of(server, location)["progress"]["points_done"] > 0, 30, "job running")
        assert server.delete(location).json()["state"] == "cancelled"
        after = submit(server, points=2)  # the worker stops the cancelled job and moves on
        assert finished(server, after, 30)["state"] == "succeeded"
        view = state_of(server, location)
        assert view["state"] == "cancelled" and view["progress"]["points_done"] < 200


def test_sigkill_of_the_job_worker_mid_job_resumes_the_job_or_fails_it_with_a_reason(tmp_path):
    with serve(tmp_path, HEATPATH_JOB_MAX_ATTEMPTS="2") as server:
        location = submit(server, points=30, delay_s=0.1)
        job_id = location.rsplit("/", 1)[1]
        wait_for(lambda: state_of(server, location)["progress"]["points_done"] > 0, 30, "job running")
        first = worker_pid(tmp_path, job_id)
        os.kill(first, signal.SIGKILL)
        done = finished(server, location, 90)  # restarted worker + stale heartbeat (2 s) → second attempt
        assert done["state"] == "succeeded" and done["attempts"] == 2, done
        assert f":{first} stopped during attempt 1; queued again" in done["notes"][0]
        assert worker_pid(tmp_path, job_id) != first
        # killed on the last attempt too: the job ends failed, saying why
        location = submit(server, points=30, delay_s=0.1, tag="second")
        job_id = location.rsplit("/", 1)[1]
        for attempt in (1, 2):
            wait_for(lambda a=attempt: (v := state_of(server, location))["attempts"] == a
                     and v["state"] == "running" and v["progress"]["points_done"] > 0, 60, f"attempt {attempt}")
            os.kill(worker_pid(tmp_path, job_id), signal.SIGKILL)
        done = finished(server, location, 60)
        assert done["state"] == "failed" and done["error"]["type"].endswith("/worker-lost"), done
        assert "2 time(s)" in done["error"]["detail"]


def test_restarting_the_whole_service_keeps_finished_results_and_queued_jobs(tmp_path):
    with serve(tmp_path) as server:
        done_location = submit(server, points=3)
        assert finished(server, done_location)["state"] == "succeeded"
        result = server.get(done_location + "/result").content
    with serve(tmp_path, job_workers=0) as server:  # no worker: jobs stay queued
        queued = [submit(server, points=n, delay_s=0.01) for n in (4, 5)]
        time.sleep(1)
        assert [state_of(server, q)["state"] for q in queued] == ["queued", "queued"]
    with serve(tmp_path) as server:
        assert server.get(done_location + "/result").content == result
        assert [finished(server, q)["state"] for q in queued] == ["succeeded", "succeeded"]


def test_two_servers_sharing_one_store_see_the_same_jobs_and_cache(tmp_path):
    with serve(tmp_path, job_workers=1) as first, serve(tmp_path, job_workers=0) as second:
        location = submit(second, points=6, delay_s=0.01)  # queued by one server, run by the other's worker
        assert finished(first, location)["state"] == "succeeded"
        assert finished(second, location)["state"] == "succeeded"
        assert second.get(location + "/result").json()["sum_of_squares"] == 55
        computed = first.post(COUNT_URL, json={"points": 9})
        shared = second.post(COUNT_URL, json={"points": 9})
        assert (computed.headers["X-Heatpath-Cache"], shared.headers["X-Heatpath-Cache"]) == ("miss", "hit")
        assert computed.content == shared.content


def test_keys_are_not_in_the_server_logs_and_requests_carry_request_ids(tmp_path):
    from service.auth import create_key
    from service.store import open_store

    _, key = create_key(open_store(str(tmp_path / "store.sqlite3")), "A. Person")
    with serve(tmp_path) as server:
        headers = {"Authorization": f"Bearer {key}", "X-Request-Id": "trace-123"}
        assert server.get("/v1/datasets", headers=headers).headers["X-Request-Id"] == "trace-123"
        assert server.get("/v1/datasets").status_code == 401
        location = submit_with(server, key)
        assert finished_with(server, location, key)["state"] == "succeeded"
    log = server.log_path.read_text()
    assert key.split("_", 2)[2] not in log
    lines = [json.loads(line) for line in log.splitlines() if line.startswith("{")]
    assert any(entry.get("request_id") == "trace-123" and entry.get("status") == 200 for entry in lines)


def submit_with(server: Server, key: str) -> str:
    response = server.post(COUNT_URL, json={"points": 2, "async": True}, headers={"Authorization": f"Bearer {key}"})
    assert response.status_code == 202, response.text
    return response.headers["Location"]


def finished_with(server: Server, location: str, key: str) -> dict:
    headers = {"Authorization": f"Bearer {key}"}
    return wait_for(lambda: (v := server.get(location, headers=headers).json())["state"] == "succeeded" and v, 30,
                    "job with key")


def test_service_refuses_to_listen_beyond_loopback_without_keys(tmp_path):
    port = free_port()
    env = {**os.environ, "HEATPATH_BIND": f"0.0.0.0:{port}", "HEATPATH_STORE": str(tmp_path / "store.sqlite3"),
           "HEATPATH_JOB_WORKERS": "0"}
    env.pop("HEATPATH_ALLOW_OPEN", None)
    done = subprocess.run([sys.executable, "-m", "gunicorn", "--config", "service/gunicorn_conf.py",
                           "service:create_app()"], cwd=REPO, env=env, capture_output=True, timeout=60)
    assert done.returncode != 0
    assert b"REFUSING TO START" in done.stderr and b"HEATPATH_ALLOW_OPEN" in done.stderr
