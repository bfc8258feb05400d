"""Result cache (service/cache.py) through run_or_enqueue: hits, ETag/304, corruption, eviction."""

from __future__ import annotations

import hashlib
import sqlite3

from prometheus_client import REGISTRY

from service.cache import encode_result, result_key
from service.provenance import canonical_json, code_version
from tests.service.team_support import COUNT_URL, count_squares, make_app


def lookups(result: str) -> float:
    return REGISTRY.get_sample_value("heatpath_cache_lookups_total", {"result": result}) or 0.0


def test_second_identical_request_is_served_from_the_cache_and_the_metric_counts_it(tmp_path):
    client = make_app(tmp_path).test_client()
    hits, misses = lookups("hit"), lookups("miss")
    first = client.post(COUNT_URL, json={"points": 4})
    second = client.post(COUNT_URL, json={"points": 4})
    assert (first.headers["X-Heatpath-Cache"], second.headers["X-Heatpath-Cache"]) == ("miss", "hit")
    assert first.get_data() == second.get_data()
    assert first.get_json() == count_squares({"points": 4}, lambda *_: None)
    assert (lookups("hit") - hits, lookups("miss") - misses) == (1, 1)
    text = client.get("/metrics").get_data(as_text=True)
    assert 'heatpath_cache_lookups_total{result="hit"}' in text and "heatpath_cache_hit_ratio" in text


def test_etag_is_the_cache_key_and_if_none_match_gives_304(tmp_path):
    client = make_app(tmp_path).test_client()
    response = client.post(COUNT_URL, json={"points": 4})
    key = result_key("test/count", {"points": 4}, _default_checksum(), code_version())
    assert response.headers["ETag"] == f'"{key}"'
    again = client.post(COUNT_URL, json={"points": 4}, headers={"If-None-Match": f'"{key}"'})
    assert again.status_code == 304 and again.get_data() == b"" and again.headers["ETag"] == f'"{key}"'
    weak = client.post(COUNT_URL, json={"points": 4}, headers={"If-None-Match": f'"other", W/"{key}"'})
    assert weak.status_code == 304
    other = client.post(COUNT_URL, json={"points": 5}, headers={"If-None-Match": f'"{key}"'})
    assert other.status_code == 200 and other.headers["ETag"] != f'"{key}"'


def _default_checksum() -> str:
    from thermo.dataset import load_dataset

    return load_dataset().checksum


def test_cache_key_depends_on_request_dataset_and_code_version():
    base = result_key("op", {"a": 1.0}, "c" * 64, "1.0")
    assert base == result_key("op", {"a": 1.0}, "c" * 64, "1.0")
    expected = hashlib.sha256(canonical_json({"operation": "op", "request": {"a": 1.0}, "dataset_checksum": "c" * 64,
                                              "code_version": "1.0"}).encode()).hexdigest()
    assert base == expected
    assert len({base, result_key("op2", {"a": 1.0}, "c" * 64, "1.0"), result_key("op", {"a": 2.0}, "c" * 64, "1.0"),
                result_key("op", {"a": 1.0}, "d" * 64, "1.0"), result_key("op", {"a": 1.0}, "c" * 64, "1.1")}) == 5


def test_a_corrupted_entry_is_detected_recomputed_and_never_served(tmp_path):
    client = make_app(tmp_path).test_client()
    good = client.post(COUNT_URL, json={"points": 6})
    key = good.headers["ETag"].strip('"')
    with sqlite3.connect(tmp_path / "store.sqlite3") as db:  # flip the result in place, keep the checksum
        tampered = good.get_data().replace(b'"sum_of_squares":55', b'"sum_of_squares":56')
        assert tampered != good.get_data()
        db.execute("UPDATE hp_cache SET body = ? WHERE key = ?", (tampered, key))
    corrupt = lookups("corrupt")
    again = client.post(COUNT_URL, json={"points": 6})
    assert again.headers["X-Heatpath-Cache"] == "miss" and again.get_data() == good.get_data()
    assert lookups("corrupt") - corrupt == 1
    assert client.post(COUNT_URL, json={"points": 6}).headers["X-Heatpath-Cache"] == "hit"


def test_the_cache_is_bounded_by_size_with_least_recently_used_eviction(tmp_path):
    body_size = len(encode_result(count_squares({"points": 1}, lambda *_: None)))
    app = make_app(tmp_path, HEATPATH_CACHE_MAX_BYTES=2 * body_size + body_size // 2)
    client = app.test_client()
    for n in (1, 2, 3):
        client.post(COUNT_URL, json={"points": n})
    entries, size = app.extensions["heatpath"].store.cache_usage()
    assert entries == 2 and size <= app.config["HEATPATH_CACHE_MAX_BYTES"]
    assert client.post(COUNT_URL, json={"points": 1}).headers["X-Heatpath-Cache"] == "miss"  # evicted
    assert client.post(COUNT_URL, json={"points": 3}).headers["X-Heatpath-Cache"] == "hit"


def test_two_apps_sharing_one_store_share_the_cache(tmp_path):
    first, second = make_app(tmp_path).test_client(), make_app(tmp_path).test_client()
    assert first.post(COUNT_URL, json={"points": 7}).headers["X-Heatpath-Cache"] == "miss"
    assert second.post(COUNT_URL, json={"points": 7}).headers["X-Heatpath-Cache"] == "hit"
