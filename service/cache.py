"""Cache of deterministic results, shared by every process that uses the same store.

A result is fully determined by the operation, its parsed request, the dataset (by checksum)
and the code version, so the cache key is the SHA-256 of the canonical JSON of those four; the
same key is the result's HTTP ``ETag``. Each entry keeps the SHA-256 of its body; an entry whose
body no longer matches (a damaged disk page, a manual edit, a truncated write) is counted as
``corrupt``, deleted and recomputed, never served. The store bounds the total size
(``HEATPATH_CACHE_MAX_BYTES``) by evicting the least recently used entries.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping
from typing import Any

from service.metrics import CACHE_LOOKUPS
from service.provenance import canonical_json
from service.store import Store


def result_key(operation: str, params: Mapping[str, Any], dataset_checksum: str, code_version: str) -> str:
    """Cache key and ETag of a result: SHA-256 (hex) of the canonical JSON of what determines it."""
    identity = {"operation": operation, "request": dict(params), "dataset_checksum": dataset_checksum,
                "code_version": code_version}
    return hashlib.sha256(canonical_json(identity).encode("utf-8")).hexdigest()


def encode_result(result: Mapping[str, Any]) -> bytes:
    """The response body of a result (canonical JSON, so every path serves identical bytes)."""
    return canonical_json(result).encode("utf-8")


class ResultCache:
    """Checksummed, size-bounded result cache on top of a :class:`~service.store.Store`."""

    def __init__(self, store: Store, max_bytes: int) -> None:
        self.store, self.max_bytes = store, max_bytes

    def get(self, key: str) -> bytes | None:
        """The cached body for ``key``, or None (absent, or corrupt and now dropped)."""
        found = self.store.cache_get(key)
        if found is None:
            CACHE_LOOKUPS.labels("miss").inc()
            return None
        body, checksum = found
        if hashlib.sha256(body).hexdigest() != checksum:
            CACHE_LOOKUPS.labels("corrupt").inc()
            self.store.cache_delete(key)
            return None
        CACHE_LOOKUPS.labels("hit").inc()
        return body

    def put(self, key: str, body: bytes) -> None:
        """Keep ``body`` under ``key`` (bodies larger than the whole cache are not kept)."""
        if len(body) <= self.max_bytes:
            self.store.cache_put(key, body, hashlib.sha256(body).hexdigest(), self.max_bytes)
