"""API keys (service/auth.py, ``heatpath keys``): 401s, revocation, per-key jobs, no key in clear anywhere."""

from __future__ import annotations

import json
import logging
import sqlite3

import pytest

from service.auth import create_key, has_active_keys, list_keys, revoke_key, verify
from service.cli import main
from service.logs import JsonFormatter
from tests.service.team_support import COUNT_URL, bearer, make_app

DATASETS = "/v1/datasets"


@pytest.fixture
def app(tmp_path):
    return make_app(tmp_path)


@pytest.fixture
def store(app):
    return app.extensions["heatpath"].store


def assert_401(response) -> dict:
    assert response.status_code == 401, response.get_data(as_text=True)
    assert response.mimetype == "application/problem+json"
    assert response.headers["WWW-Authenticate"].startswith('Bearer realm="heatpath"')
    body = response.get_json()
    assert body["status"] == 401 and body["type"].endswith("/unauthenticated")
    return body


def test_a_fresh_server_without_keys_is_open(app):
    assert app.test_client().get(DATASETS).status_code == 200


def test_once_a_key_exists_requests_without_it_get_401(app, store):
    create_key(store, "A. Person, Institute One")
    assert_401(app.test_client().get(DATASETS))


def test_wrong_malformed_and_valid_keys(app, store):
    _key_id, key = create_key(store, "A. Person, Institute One")
    client = app.test_client()
    assert client.get(DATASETS, headers=bearer(key)).status_code == 200
    wrong_secret = key[:-4] + ("AAAA" if not key.endswith("AAAA") else "BBBB")
    for header in (bearer(wrong_secret), bearer("hpk_000000000000_nothing"), bearer("not-a-key"),
                   {"Authorization": f"Basic {key}"}, {"Authorization": "Bearer "}):
        assert_401(client.get(DATASETS, headers=header))


def test_a_revoked_key_gets_401_at_once(app, store):
    key_id, key = create_key(store, "A. Person")
    _other_id, other = create_key(store, "B. Person")
    client = app.test_client()
    assert client.get(DATASETS, headers=bearer(key)).status_code == 200  # verification now remembered
    assert revoke_key(store, key_id)
    assert "revoked" in assert_401(client.get(DATASETS, headers=bearer(key)))["detail"]
    assert client.get(DATASETS, headers=bearer(other)).status_code == 200
    assert not revoke_key(store, key_id)  # already revoked


def test_revoking_the_last_key_reopens_only_in_auto_mode(tmp_path):
    app = make_app(tmp_path)
    store = app.extensions["heatpath"].store
    key_id, _ = create_key(store, "A. Person")
    revoke_key(store, key_id)
    assert not has_active_keys(store)
    assert app.test_client().get(DATASETS).status_code == 200
    strict = make_app(tmp_path, HEATPATH_AUTH="required")
    assert_401(strict.test_client().get(DATASETS))


def test_health_ready_and_metrics_stay_open(app, store):
    create_key(store, "A. Person")
    client = app.test_client()
    for url in ("/v1/health", "/v1/ready", "/metrics"):
        assert client.get(url).status_code == 200, url


def test_a_key_cannot_see_or_cancel_another_keys_job(app, store):
    _, alice = create_key(store, "Alice, Institute One")
    _, bob = create_key(store, "Bob, Institute Two")
    client = app.test_client()
    submitted = client.post(COUNT_URL, json={"points": 3, "async": True}, headers=bearer(alice))
    assert submitted.status_code == 202
    job_url = submitted.headers["Location"]
    assert client.get(job_url, headers=bearer(alice)).status_code == 200
    for method, url in (("get", job_url), ("get", job_url + "/result"), ("delete", job_url)):
        response = getattr(client, method)(url, headers=bearer(bob))
        assert response.status_code == 404, (method, url)
        assert response.get_json()["errors"][0]["field"] == "job_id"
    assert client.get("/v1/jobs", headers=bearer(bob)).get_json() == {"jobs": []}
    assert len(client.get("/v1/jobs", headers=bearer(alice)).get_json()["jobs"]) == 1


def test_store_keeps_only_salted_hashes(tmp_path, store):
    key_id, key = create_key(store, "A. Person")
    secret = key.split("_", 2)[2]
    raw = (tmp_path / "store.sqlite3").read_bytes() + b"".join(
        p.read_bytes() for p in tmp_path.glob("store.sqlite3-*"))  # WAL file too
    assert secret.encode() not in raw and key.encode() not in raw
    record = sqlite3.connect(tmp_path / "store.sqlite3").execute(
        "SELECT doc FROM hp_docs WHERE kind = 'key' AND id = ?", (key_id,)).fetchone()[0]
    assert secret not in record and {"salt", "hash"} <= set(json.loads(record))
    _, key2 = create_key(store, "B. Person")
    records = [store.get("key", k["id"])[0] for k in list_keys(store)]
    assert len({r["salt"] for r in records}) == 2 and len({r["hash"] for r in records}) == 2
    assert verify(store, key)[0] == key_id and verify(store, key2)[0] != key_id


def test_listing_never_shows_salt_hash_or_key(store):
    _, _key = create_key(store, "A. Person", requests_per_minute=10)
    (row,) = list_keys(store)
    assert set(row) == {"id", "owner", "created_at", "revoked_at", "requests_per_minute", "compute_seconds_per_day"}
    assert row["requests_per_minute"] == 10


def test_keys_are_never_logged(app, store, caplog):
    _, key = create_key(store, "A. Person")
    client = app.test_client()
    with caplog.at_level(logging.DEBUG):
        client.get(DATASETS, headers=bearer(key))
        client.get(DATASETS, headers=bearer(key + "x"))
        client.post(COUNT_URL, json={"points": 2}, headers=bearer(key))
    assert caplog.records, "the request log wrote nothing"
    formatter = JsonFormatter()
    text = "\n".join(formatter.format(r) for r in caplog.records)
    assert key.split("_", 2)[2] not in text and "Bearer" not in text
    assert key.split("_", 2)[1] in text  # the public key id is logged


def test_keys_commands_create_list_and_revoke(tmp_path, monkeypatch, capsys):
    monkeypatch.setenv("HEATPATH_STORE", str(tmp_path / "cli.sqlite3"))
    assert main(["keys", "create", "--owner", "C. Person, Institute Three", "--compute-seconds-per-day", "50",
                 "--json"]) == 0
    created = json.loads(capsys.readouterr().out)
    assert created["key"].startswith(f"hpk_{created['id']}_")
    assert main(["keys", "list"]) == 0
    listing = capsys.readouterr().out
    assert created["id"] in listing and "C. Person" in listing and "active" in listing
    assert created["key"].split("_", 2)[2] not in listing
    app = make_app(tmp_path, HEATPATH_STORE=str(tmp_path / "cli.sqlite3"))
    assert app.test_client().get(DATASETS, headers=bearer(created["key"])).status_code == 200
    assert main(["keys", "revoke", created["id"]]) == 0
    assert main(["keys", "revoke", created["id"]]) == 1
    assert_401(app.test_client().get(DATASETS, headers=bearer(created["key"])))
    capsys.readouterr()
    assert main(["keys", "list", "--json"]) == 0
    (row,) = json.loads(capsys.readouterr().out)
    assert row["id"] == created["id"] and row["revoked_at"] is not None and row["compute_seconds_per_day"] == 50


def test_keys_create_refuses_an_empty_owner(tmp_path, monkeypatch):
    monkeypatch.setenv("HEATPATH_STORE", str(tmp_path / "cli.sqlite3"))
    with pytest.raises(SystemExit, match="owner"):
        main(["keys", "create", "--owner", "  "])
