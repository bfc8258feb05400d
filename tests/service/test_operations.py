"""Operations (service/operations.py, logs.py, settings.py, gunicorn_conf.py): ids, logs, ready, metrics."""

from __future__ import annotations

import json
import logging

import pytest

from service.logs import JsonFormatter
from service.settings import default_limit_storage, default_queue, is_exposed, resolve
from service.store import StoreError
from tests.service.team_support import make_app


def test_every_response_carries_a_request_id_and_a_sane_incoming_one_is_kept(tmp_path):
    client = make_app(tmp_path).test_client()
    generated = client.get("/v1/health").headers["X-Request-Id"]
    assert len(generated) == 32
    assert client.get("/v1/health").headers["X-Request-Id"] != generated
    assert client.get("/v1/health", headers={"X-Request-Id": "proxy-42.a"}).headers["X-Request-Id"] == "proxy-42.a"
    odd = client.get("/v1/health", headers={"X-Request-Id": "x" * 200}).headers["X-Request-Id"]
    assert odd != "x" * 200
    assert client.get("/v1/nowhere").headers["X-Request-Id"]  # errors too
    assert client.get("/v1/health", headers={"Accept": "image/gif"}).headers["X-Request-Id"]


def test_request_log_is_one_json_object_with_the_request_id(tmp_path, caplog):
    client = make_app(tmp_path).test_client()
    with caplog.at_level(logging.INFO, logger="heatpath.request"):
        client.get("/v1/datasets", headers={"X-Request-Id": "abc-1"})
    (record,) = [r for r in caplog.records if r.name == "heatpath.request"]
    entry = json.loads(JsonFormatter().format(record))
    assert entry["request_id"] == "abc-1" and entry["status"] == 200 and entry["endpoint"] == "/v1/datasets"
    assert entry["level"] == "info" and entry["time"].endswith("Z") and entry["duration_ms"] >= 0


def test_ready_reports_its_checks(tmp_path):
    body = make_app(tmp_path).test_client().get("/v1/ready").get_json()
    assert body["status"] == "ready" and body["checks"] == {"dataset": "ok", "store": "ok", "queue": "ok"}
    assert body["job_workers_seen"] == 0


def test_ready_is_503_problem_when_the_store_is_unreachable(tmp_path, monkeypatch):
    app = make_app(tmp_path)

    def broken():
        raise StoreError("disk gone")

    monkeypatch.setattr(app.extensions["heatpath"].store, "ping", broken)
    response = app.test_client().get("/v1/ready")
    assert response.status_code == 503 and response.mimetype == "application/problem+json"
    body = response.get_json()
    assert body["checks"]["store"] == "failed" and "disk gone" in body["detail"]


def test_metrics_count_requests_by_route_and_status(tmp_path):
    client = make_app(tmp_path).test_client()
    client.get("/v1/datasets/none/endmembers")
    response = client.get("/metrics")
    assert response.status_code == 200 and response.mimetype == "text/plain"
    text = response.get_data(as_text=True)
    assert 'heatpath_http_requests_total{endpoint="/v1/datasets/<dataset_id>/endmembers",method="GET",status="404"}' \
        in text
    for name in ("heatpath_http_request_duration_seconds_bucket", "heatpath_job_queue_depth",
                 'heatpath_jobs{state="queued"}', "heatpath_cache_entries"):
        assert name in text


@pytest.mark.parametrize(("address", "exposed"), [
    (("127.0.0.1", 8000), False), (("127.0.0.5", 1), False), (("::1", 8000), False), (("localhost", 80), False),
    (("0.0.0.0", 8000), True), (("::", 8000), True), (("192.0.2.10", 80), True), (("example.org", 80), True),
    ("/run/heatpath.sock", False),
])
def test_loopback_addresses_and_unix_sockets_are_not_exposed(address, exposed):
    assert is_exposed(address) is exposed


def test_settings_come_from_config_then_environment_then_defaults(tmp_path):
    env = {"HEATPATH_STORE": str(tmp_path / "s.sqlite3"), "HEATPATH_JOB_WORKERS": "3", "HEATPATH_ALLOW_OPEN": "yes"}
    settings = resolve({"HEATPATH_JOB_WORKERS": 0}, env)
    assert settings["HEATPATH_JOB_WORKERS"] == 0 and settings["HEATPATH_ALLOW_OPEN"] is True
    assert settings["HEATPATH_QUEUE"] == str(tmp_path / "s-queue.sqlite3")
    assert settings["HEATPATH_RATE_LIMIT_STORAGE"] == f"heatpath-sqlite:///{tmp_path}/s.sqlite3"
    assert resolve({}, {})["HEATPATH_STORE"] == "var/heatpath.sqlite3"
    assert resolve({"TESTING": True}, {})["HEATPATH_STORE"] == ":memory:"
    assert default_queue("redis://h:6379/0") == default_limit_storage("redis://h:6379/0") == "redis://h:6379/0"
    with pytest.raises(SystemExit, match="HEATPATH_JOB_WORKERS"):
        resolve({}, {"HEATPATH_JOB_WORKERS": "many"})
