"""The store backends (service/store.py) obey one contract: SQLite file, SQLite memory and Redis."""

from __future__ import annotations

import threading
import time

import fakeredis
import pytest

from service.store import RedisStore, SqliteStore, StoreError, open_store


@pytest.fixture(params=["sqlite-file", "sqlite-memory", "redis"])
def store(request, tmp_path):
    if request.param == "sqlite-file":
        return SqliteStore(str(tmp_path / "store.sqlite3"))
    if request.param == "sqlite-memory":
        return SqliteStore(":memory:")
    return RedisStore("redis://fake", client=fakeredis.FakeRedis())


def test_documents_are_created_once_and_replaced_only_at_the_read_version(store):
    assert store.create("job", "a", {"x": 1})
    assert not store.create("job", "a", {"x": 2})
    data, version = store.get("job", "a")
    assert data == {"x": 1} and version == 1
    assert store.replace("job", "a", {"x": 3}, version)
    assert not store.replace("job", "a", {"x": 4}, version)  # stale version refused
    assert store.get("job", "a") == ({"x": 3}, 2)
    assert [i for i, _, _ in store.scan("job")] == ["a"]
    store.delete("job", "a")
    assert store.get("job", "a") is None and store.scan("job") == []


def test_documents_expire(store):
    store.create("job", "short", {"x": 1}, ttl_s=0.2)
    store.create("job", "long", {"x": 1})
    time.sleep(0.35)
    assert store.get("job", "short") is None
    assert [i for i, _, _ in store.scan("job")] == ["long"]


def test_concurrent_modifications_are_not_lost(store):
    store.create("meta", "n", {"n": 0})

    def bump():
        for _ in range(25):
            store.modify("meta", "n", lambda d: {"n": d["n"] + 1})

    threads = [threading.Thread(target=bump) for _ in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert store.get("meta", "n")[0] == {"n": 100}


def test_counters_add_up_and_expire(store):
    assert store.add("c", 1.5, 10) == 1.5
    assert store.add("c", 2.0, 10) == 3.5
    assert store.counter("c") == 3.5 and store.counter("other") == 0.0
    store.add("short", 1.0, 1)
    time.sleep(1.2)
    assert store.counter("short") == 0.0


def test_cache_evicts_least_recently_used_beyond_the_size_bound(store):
    for name in ("a", "b", "c"):
        store.cache_put(name, b"x" * 100, "sum", max_bytes=250)
        time.sleep(0.01)
    assert store.cache_get("a") is None  # oldest evicted
    assert store.cache_usage() == (2, 200)
    store.cache_get("b")  # b becomes the most recently used
    time.sleep(0.01)
    store.cache_put("d", b"y" * 100, "sum", max_bytes=250)
    assert store.cache_get("c") is None and store.cache_get("b") == (b"x" * 100, "sum")
    store.cache_delete("b")
    assert store.cache_usage() == (1, 100)


def test_open_store_chooses_the_backend_from_the_setting(tmp_path):
    assert isinstance(open_store(str(tmp_path / "s.sqlite3")), SqliteStore)
    assert isinstance(open_store(f"sqlite:///{tmp_path}/t.sqlite3"), SqliteStore)
    assert (tmp_path / "t.sqlite3").exists()
    assert isinstance(open_store("redis://127.0.0.1:1/0"), RedisStore)


def test_unreachable_redis_is_a_store_error():
    with pytest.raises(StoreError):
        open_store("redis://127.0.0.1:1/0").ping()
