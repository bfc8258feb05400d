"""Request limits and compute-seconds quotas per key (service/quotas.py)."""

from __future__ import annotations

import time

import pytest

from service import quotas
from service.auth import create_key
from service.quotas import SqliteLimitStorage, seconds_to_midnight, utc_day
from tests.service.team_support import COUNT_URL, bearer, make_app

DATASETS = "/v1/datasets"


def assert_429(response, slug: str) -> int:
    assert response.status_code == 429, response.get_data(as_text=True)
    assert response.mimetype == "application/problem+json"
    assert response.get_json()["type"].endswith("/" + slug)
    retry = int(response.headers["Retry-After"])
    assert retry >= 1
    return retry


def test_exceeding_the_request_limit_gives_429_with_retry_after_and_the_limit_resets(tmp_path):
    # 90 requests per minute scaled to a 2 s window = 3 requests per window.
    app = make_app(tmp_path, HEATPATH_RATE_WINDOW_S=2)
    store = app.extensions["heatpath"].store
    _, key = create_key(store, "A. Person", requests_per_minute=90)
    _, other = create_key(store, "B. Person", requests_per_minute=90)
    client = app.test_client()
    # The fixed window opens with the key's first request, so the four requests share it.
    assert [client.get(DATASETS, headers=bearer(key)).status_code for _ in range(3)] == [200] * 3
    retry = assert_429(client.get(DATASETS, headers=bearer(key)), "rate-limited")
    assert retry <= 3  # the 2 s window, rounded up to whole seconds by the limiter
    assert client.get(DATASETS, headers=bearer(other)).status_code == 200  # each key has its own allowance
    time.sleep(retry + 0.1)
    assert client.get(DATASETS, headers=bearer(key)).status_code == 200


def test_request_limit_is_shared_by_apps_on_one_store(tmp_path):
    """Two apps (as two gunicorn workers) on one SQLite store count the same requests."""
    first, second = make_app(tmp_path, HEATPATH_RATE_WINDOW_S=60), make_app(tmp_path, HEATPATH_RATE_WINDOW_S=60)
    _, key = create_key(first.extensions["heatpath"].store, "A. Person", requests_per_minute=2)
    assert first.test_client().get(DATASETS, headers=bearer(key)).status_code == 200
    assert second.test_client().get(DATASETS, headers=bearer(key)).status_code == 200
    assert_429(first.test_client().get(DATASETS, headers=bearer(key)), "rate-limited")
    assert_429(second.test_client().get(DATASETS, headers=bearer(key)), "rate-limited")


def test_health_is_never_rate_limited(tmp_path):
    app = make_app(tmp_path)
    _, _key = create_key(app.extensions["heatpath"].store, "A. Person", requests_per_minute=1)
    client = app.test_client()
    assert all(client.get("/v1/health").status_code == 200 for _ in range(5))


def test_compute_quota_refuses_new_work_until_the_next_utc_day(tmp_path, monkeypatch):
    app = make_app(tmp_path)
    store = app.extensions["heatpath"].store
    _, key = create_key(store, "A. Person", compute_seconds_per_day=0.05)
    client = app.test_client()
    first = client.post(COUNT_URL, json={"points": 3, "delay_s": 0.03}, headers=bearer(key))
    assert first.status_code == 200  # the budget is checked before work starts; this run uses ~0.09 s
    refused = client.post(COUNT_URL, json={"points": 4}, headers=bearer(key))
    retry = assert_429(refused, "compute-quota-exceeded")
    assert abs(retry - seconds_to_midnight()) <= 2
    # cached results cost nothing and stay available
    again = client.post(COUNT_URL, json={"points": 3, "delay_s": 0.03}, headers=bearer(key))
    assert again.status_code == 200 and again.headers["X-Heatpath-Cache"] == "hit"
    # a job is refused the same way
    assert_429(client.post(COUNT_URL, json={"points": 4, "async": True}, headers=bearer(key)), "compute-quota-exceeded")
    tomorrow = utc_day(time.time() + 86400)
    monkeypatch.setattr(quotas, "utc_day", lambda now=None: tomorrow)
    assert client.post(COUNT_URL, json={"points": 4}, headers=bearer(key)).status_code == 200


def test_compute_seconds_are_charged_to_the_key(tmp_path):
    app = make_app(tmp_path)
    store = app.extensions["heatpath"].store
    key_id, key = create_key(store, "A. Person")
    app.test_client().post(COUNT_URL, json={"points": 5, "delay_s": 0.02}, headers=bearer(key))
    app.test_client().post(COUNT_URL, json={"points": 5, "delay_s": 0.02, "x": 1, "async": True},
                           headers=bearer(key))
    used = store.counter(f"compute:key:{key_id}:{utc_day()}")
    assert 0.2 <= used < 1.0  # two runs of 5 × 20 ms sleeps


def test_sqlite_limit_storage_counts_and_expires(tmp_path):
    storage = SqliteLimitStorage(f"heatpath-sqlite:///{tmp_path}/limits.sqlite3")
    assert storage.check()
    assert [storage.incr("k", 1) for _ in range(3)] == [1, 2, 3]
    assert storage.get("k") == 3 and storage.get_expiry("k") > time.time()
    time.sleep(1.1)
    assert storage.get("k") == 0
    assert storage.incr("k", 1) == 1
    storage.clear("k")
    assert storage.get("k") == 0
    storage.incr("a", 5)
    assert storage.reset() >= 1


@pytest.mark.parametrize(("now", "day", "left"), [(0.0, "1970-01-01", 86400.0), (86399.5, "1970-01-01", 0.5)])
def test_utc_day_and_seconds_to_midnight(now, day, left):
    assert utc_day(now) == day and seconds_to_midnight(now) == pytest.approx(left)
