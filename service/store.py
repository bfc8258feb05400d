"""The service's embedded store: API keys, jobs, usage counters and cached results.

Two interchangeable backends behind one small interface:

- :class:`SqliteStore` (default, ``HEATPATH_STORE=var/heatpath.sqlite3``): one SQLite file in
  WAL mode, shared by every process on the machine (gunicorn workers, job workers, the
  ``heatpath keys`` command); no server to run.
- :class:`RedisStore` (``HEATPATH_STORE=redis://...``): the same records in Redis, shared by
  several hosts (docs/operations.md).

Records are JSON *documents* grouped by ``kind`` (``key``, ``job``, ...) with a version number
for optimistic concurrency: :meth:`Store.replace` succeeds only if nobody changed the document
since it was read, and :meth:`Store.modify` retries a change until it applies. Documents may
expire (finished jobs are kept for ``HEATPATH_JOB_RETENTION_S``). Counters are floats that
expire (compute-seconds used per key per day). The cache keeps opaque byte strings with their
checksum, bounded in total size by evicting the least recently used entries.
"""

from __future__ import annotations

import contextlib
import json
import os
import sqlite3
import threading
import time
import uuid
from abc import ABC, abstractmethod
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

from service.settings import is_redis, sqlite_path

Doc = tuple[dict[str, Any], int]


class StoreError(RuntimeError):
    """The store cannot be reached or used."""


class Store(ABC):
    """Interface of the store backends (see the module docstring)."""

    url: str

    @abstractmethod
    def get(self, kind: str, doc_id: str) -> Doc | None:
        """The document and its version, or None if absent or expired."""

    @abstractmethod
    def create(self, kind: str, doc_id: str, data: dict[str, Any], ttl_s: float | None = None) -> bool:
        """Add a document (version 1); False if one with this id exists."""

    @abstractmethod
    def replace(self, kind: str, doc_id: str, data: dict[str, Any], version: int, ttl_s: float | None = None) -> bool:
        """Overwrite a document if it is still at ``version``; ``ttl_s`` None keeps it forever."""

    @abstractmethod
    def delete(self, kind: str, doc_id: str) -> None:
        """Remove a document (no error if absent)."""

    @abstractmethod
    def scan(self, kind: str) -> list[tuple[str, dict[str, Any], int]]:
        """Every live document of a kind as ``(id, data, version)``."""

    @abstractmethod
    def add(self, name: str, amount: float, ttl_s: float) -> float:
        """Add to a counter (created with expiry ``ttl_s`` if absent or expired); the new value."""

    @abstractmethod
    def counter(self, name: str) -> float:
        """Current value of a counter (0 if absent or expired)."""

    @abstractmethod
    def cache_get(self, key: str) -> tuple[bytes, str] | None:
        """A cached body and its stored checksum, marking it recently used."""

    @abstractmethod
    def cache_put(self, key: str, body: bytes, checksum: str, max_bytes: int) -> int:
        """Store a body; evict least recently used entries beyond ``max_bytes``; the number evicted."""

    @abstractmethod
    def cache_delete(self, key: str) -> None:
        """Drop one cache entry."""

    @abstractmethod
    def cache_usage(self) -> tuple[int, int]:
        """Number of cache entries and their total size in bytes."""

    @abstractmethod
    def ping(self) -> None:
        """Raise :class:`StoreError` unless the store answers."""

    def modify(self, kind: str, doc_id: str, change: Callable[[dict[str, Any]], dict[str, Any] | None],
               ttl_s: Callable[[dict[str, Any]], float | None] | None = None, attempts: int = 50) -> dict | None:
        """Apply ``change`` (returns the new document, or None to leave it) until no concurrent write interferes.

        Returns the new document, or None when the document is absent or ``change`` declined.
        """
        for _ in range(attempts):
            found = self.get(kind, doc_id)
            if found is None:
                return None
            data, version = found
            new = change(dict(data))
            if new is None:
                return None
            if self.replace(kind, doc_id, new, version, ttl_s(new) if ttl_s else None):
                return new
        raise StoreError(f"{kind} {doc_id} changed {attempts} times while being updated")


SCHEMA = (
    "CREATE TABLE IF NOT EXISTS hp_docs (kind TEXT NOT NULL, id TEXT NOT NULL, doc TEXT NOT NULL, "
    "version INTEGER NOT NULL, expires_at REAL, PRIMARY KEY (kind, id))",
    "CREATE TABLE IF NOT EXISTS hp_counters (name TEXT PRIMARY KEY, value REAL NOT NULL, expires_at REAL NOT NULL)",
    "CREATE TABLE IF NOT EXISTS hp_cache (key TEXT PRIMARY KEY, body BLOB NOT NULL, checksum TEXT NOT NULL, "
    "size INTEGER NOT NULL, last_used REAL NOT NULL)",
    "CREATE INDEX IF NOT EXISTS hp_cache_last_used ON hp_cache (last_used)",
)


class SqliteStore(Store):
    """The store in one SQLite file (or a private in-memory database for ``:memory:``).

    Each thread of each process gets its own connection (SQLite connections must not cross a
    fork); WAL journaling lets readers proceed while one writer writes, and a 30 s busy timeout
    makes concurrent writers wait instead of failing.
    """

    def __init__(self, path: str) -> None:
        self.memory = path == ":memory:"
        if self.memory:
            self.target = f"file:heatpath-{uuid.uuid4().hex}?mode=memory&cache=shared"
        else:
            Path(path).resolve().parent.mkdir(parents=True, exist_ok=True)
            self.target = str(Path(path).resolve())
        self.url = path if self.memory else f"sqlite:///{self.target}"
        self.path = None if self.memory else self.target
        self._local = threading.local()
        self._lock = threading.RLock()  # a shared-cache memory database allows one user at a time
        self._keeper = self._connect()  # creates the file and tables now; keeps a memory database alive

    def _connect(self) -> sqlite3.Connection:
        conn = sqlite3.connect(self.target, uri=self.memory, timeout=30, isolation_level=None,
                               check_same_thread=False)
        conn.execute("PRAGMA busy_timeout = 30000")
        if not self.memory:
            conn.execute("PRAGMA journal_mode = WAL")
            conn.execute("PRAGMA synchronous = NORMAL")
        for statement in SCHEMA:
            conn.execute(statement)
        return conn

    @contextlib.contextmanager
    def _db(self, write: bool = False) -> Iterator[sqlite3.Connection]:
        local = self._local
        if getattr(local, "pid", None) != os.getpid():
            local.conn, local.pid = self._connect(), os.getpid()
        lock = self._lock if self.memory else contextlib.nullcontext()
        with lock:
            conn = local.conn
            try:
                if write:
                    conn.execute("BEGIN IMMEDIATE")
                yield conn
                if write:
                    conn.execute("COMMIT")
            except sqlite3.Error as exc:
                if conn.in_transaction:
                    conn.execute("ROLLBACK")
                raise StoreError(f"store {self.url}: {exc}") from exc
            except BaseException:
                if conn.in_transaction:
                    conn.execute("ROLLBACK")
                raise

    @staticmethod
    def _expiry(ttl_s: float | None) -> float | None:
        return None if ttl_s is None else time.time() + ttl_s

    def get(self, kind: str, doc_id: str) -> Doc | None:
        with self._db() as db:
            row = db.execute("SELECT doc, version FROM hp_docs WHERE kind = ? AND id = ? AND "
                             "(expires_at IS NULL OR expires_at > ?)", (kind, doc_id, time.time())).fetchone()
        return None if row is None else (json.loads(row[0]), row[1])

    def create(self, kind: str, doc_id: str, data: dict[str, Any], ttl_s: float | None = None) -> bool:
        with self._db(write=True) as db:
            db.execute("DELETE FROM hp_docs WHERE kind = ? AND id = ? AND expires_at <= ?", (kind, doc_id, time.time()))
            cur = db.execute("INSERT OR IGNORE INTO hp_docs VALUES (?, ?, ?, 1, ?)",
                             (kind, doc_id, json.dumps(data), self._expiry(ttl_s)))
            return cur.rowcount == 1

    def replace(self, kind: str, doc_id: str, data: dict[str, Any], version: int, ttl_s: float | None = None) -> bool:
        with self._db(write=True) as db:
            cur = db.execute("UPDATE hp_docs SET doc = ?, version = version + 1, expires_at = ? "
                             "WHERE kind = ? AND id = ? AND version = ?",
                             (json.dumps(data), self._expiry(ttl_s), kind, doc_id, version))
            return cur.rowcount == 1

    def delete(self, kind: str, doc_id: str) -> None:
        with self._db(write=True) as db:
            db.execute("DELETE FROM hp_docs WHERE kind = ? AND id = ?", (kind, doc_id))

    def scan(self, kind: str) -> list[tuple[str, dict[str, Any], int]]:
        with self._db() as db:
            rows = db.execute("SELECT id, doc, version FROM hp_docs WHERE kind = ? AND "
                              "(expires_at IS NULL OR expires_at > ?) ORDER BY id", (kind, time.time())).fetchall()
        return [(i, json.loads(d), v) for i, d, v in rows]

    def purge_expired(self) -> int:
        """Delete expired documents and counters; the number of rows removed."""
        now = time.time()
        with self._db(write=True) as db:
            removed = db.execute("DELETE FROM hp_docs WHERE expires_at <= ?", (now,)).rowcount
            return removed + db.execute("DELETE FROM hp_counters WHERE expires_at <= ?", (now,)).rowcount

    def add(self, name: str, amount: float, ttl_s: float) -> float:
        now = time.time()
        with self._db(write=True) as db:
            db.execute(
                "INSERT INTO hp_counters VALUES (?, ?, ?) ON CONFLICT(name) DO UPDATE SET "
                "value = CASE WHEN expires_at <= ? THEN excluded.value ELSE value + excluded.value END, "
                "expires_at = CASE WHEN expires_at <= ? THEN excluded.expires_at ELSE expires_at END",
                (name, float(amount), now + ttl_s, now, now))
            return db.execute("SELECT value FROM hp_counters WHERE name = ?", (name,)).fetchone()[0]

    def counter(self, name: str) -> float:
        with self._db() as db:
            row = db.execute("SELECT value FROM hp_counters WHERE name = ? AND expires_at > ?",
                             (name, time.time())).fetchone()
        return 0.0 if row is None else float(row[0])

    def cache_get(self, key: str) -> tuple[bytes, str] | None:
        with self._db(write=True) as db:
            row = db.execute("SELECT body, checksum FROM hp_cache WHERE key = ?", (key,)).fetchone()
            if row is not None:
                db.execute("UPDATE hp_cache SET last_used = ? WHERE key = ?", (time.time(), key))
        return None if row is None else (bytes(row[0]), row[1])

    def cache_put(self, key: str, body: bytes, checksum: str, max_bytes: int) -> int:
        with self._db(write=True) as db:
            db.execute("INSERT OR REPLACE INTO hp_cache VALUES (?, ?, ?, ?, ?)",
                       (key, body, checksum, len(body), time.time()))
            total, doomed = 0, []
            for entry, size in db.execute("SELECT key, size FROM hp_cache ORDER BY last_used DESC, key"):
                total += size
                if total > max_bytes:
                    doomed.append((entry,))
            db.executemany("DELETE FROM hp_cache WHERE key = ?", doomed)
        return len(doomed)

    def cache_delete(self, key: str) -> None:
        with self._db(write=True) as db:
            db.execute("DELETE FROM hp_cache WHERE key = ?", (key,))

    def cache_usage(self) -> tuple[int, int]:
        with self._db() as db:
            count, size = db.execute("SELECT COUNT(*), COALESCE(SUM(size), 0) FROM hp_cache").fetchone()
        return int(count), int(size)

    def ping(self) -> None:
        with self._db() as db:
            db.execute("SELECT 1").fetchone()


class RedisStore(Store):
    """The store in Redis, for several hosts (keys prefixed ``hp:``).

    Documents are hashes ``hp:doc:<kind>:<id>`` (fields ``doc``, ``version``) listed in the set
    ``hp:ids:<kind>``; version checks use WATCH/MULTI transactions. Cache entries are hashes
    ``hp:cache:<key>``, ordered by last use in the sorted set ``hp:cache:lru``; their total size
    is the counter ``hp:cache:bytes``. Eviction under concurrent writers from several hosts can
    overshoot the bound briefly; it never drops below it by more than one entry.
    """

    def __init__(self, url: str, client: Any = None) -> None:
        import redis

        self.url = url
        self._redis_errors = (redis.RedisError,)
        self._watch_error = redis.WatchError
        self.r = client if client is not None else redis.Redis.from_url(url, socket_timeout=10,
                                                                         socket_connect_timeout=5)

    @contextlib.contextmanager
    def _errors(self) -> Iterator[None]:
        try:
            yield
        except self._redis_errors as exc:
            if isinstance(exc, self._watch_error):
                raise
            raise StoreError(f"store {self.url}: {exc}") from exc

    @staticmethod
    def _key(kind: str, doc_id: str) -> str:
        return f"hp:doc:{kind}:{doc_id}"

    def get(self, kind: str, doc_id: str) -> Doc | None:
        with self._errors():
            found = self.r.hmget(self._key(kind, doc_id), "doc", "version")
        if found[0] is None:
            return None
        return json.loads(found[0]), int(found[1])

    def create(self, kind: str, doc_id: str, data: dict[str, Any], ttl_s: float | None = None) -> bool:
        key = self._key(kind, doc_id)
        with self._errors():
            if not self.r.hsetnx(key, "doc", json.dumps(data)):
                return False
            pipe = self.r.pipeline()
            pipe.hset(key, "version", 1)
            if ttl_s is not None:
                pipe.pexpire(key, max(1, int(ttl_s * 1000)))
            pipe.sadd(f"hp:ids:{kind}", doc_id)
            pipe.execute()
        return True

    def replace(self, kind: str, doc_id: str, data: dict[str, Any], version: int, ttl_s: float | None = None) -> bool:
        key = self._key(kind, doc_id)
        with self._errors(), self.r.pipeline() as pipe:
            try:
                pipe.watch(key)
                current = pipe.hget(key, "version")
                if current is None or int(current) != version:
                    pipe.unwatch()
                    return False
                pipe.multi()
                pipe.hset(key, mapping={"doc": json.dumps(data), "version": version + 1})
                if ttl_s is None:
                    pipe.persist(key)
                else:
                    pipe.pexpire(key, max(1, int(ttl_s * 1000)))
                pipe.execute()
            except self._watch_error:
                return False
        return True

    def delete(self, kind: str, doc_id: str) -> None:
        with self._errors():
            self.r.delete(self._key(kind, doc_id))
            self.r.srem(f"hp:ids:{kind}", doc_id)

    def scan(self, kind: str) -> list[tuple[str, dict[str, Any], int]]:
        out = []
        with self._errors():
            for raw in sorted(self.r.smembers(f"hp:ids:{kind}")):
                doc_id = raw.decode() if isinstance(raw, bytes) else raw
                found = self.get(kind, doc_id)
                if found is None:  # expired: forget the id
                    self.r.srem(f"hp:ids:{kind}", doc_id)
                else:
                    out.append((doc_id, *found))
        return out

    def add(self, name: str, amount: float, ttl_s: float) -> float:
        key = f"hp:counter:{name}"
        with self._errors():
            value = float(self.r.incrbyfloat(key, amount))
            if self.r.ttl(key) < 0:
                self.r.expire(key, max(1, int(ttl_s)))
        return value

    def counter(self, name: str) -> float:
        with self._errors():
            value = self.r.get(f"hp:counter:{name}")
        return 0.0 if value is None else float(value)

    def cache_get(self, key: str) -> tuple[bytes, str] | None:
        with self._errors():
            body, checksum = self.r.hmget(f"hp:cache:{key}", "body", "checksum")
            if body is None:
                return None
            self.r.zadd("hp:cache:lru", {key: time.time()})
        return bytes(body), checksum.decode() if isinstance(checksum, bytes) else checksum

    def cache_put(self, key: str, body: bytes, checksum: str, max_bytes: int) -> int:
        with self._errors():
            old = self.r.hget(f"hp:cache:{key}", "size")
            pipe = self.r.pipeline()
            pipe.hset(f"hp:cache:{key}", mapping={"body": body, "checksum": checksum, "size": len(body)})
            pipe.zadd("hp:cache:lru", {key: time.time()})
            pipe.incrby("hp:cache:bytes", len(body) - int(old or 0))
            total = pipe.execute()[-1]
            evicted = 0
            while total > max_bytes:
                oldest = self.r.zpopmin("hp:cache:lru")
                if not oldest:
                    break
                victim = oldest[0][0].decode() if isinstance(oldest[0][0], bytes) else oldest[0][0]
                size = int(self.r.hget(f"hp:cache:{victim}", "size") or 0)
                self.r.delete(f"hp:cache:{victim}")
                total = self.r.decrby("hp:cache:bytes", size)
                evicted += 1
        return evicted

    def cache_delete(self, key: str) -> None:
        with self._errors():
            size = int(self.r.hget(f"hp:cache:{key}", "size") or 0)
            if self.r.delete(f"hp:cache:{key}"):
                self.r.decrby("hp:cache:bytes", size)
            self.r.zrem("hp:cache:lru", key)

    def cache_usage(self) -> tuple[int, int]:
        with self._errors():
            return int(self.r.zcard("hp:cache:lru")), int(self.r.get("hp:cache:bytes") or 0)

    def ping(self) -> None:
        with self._errors():
            self.r.ping()


def open_store(setting: str) -> Store:
    """The store named by a ``HEATPATH_STORE`` setting."""
    if is_redis(setting):
        return RedisStore(setting)
    return SqliteStore(sqlite_path(setting))
