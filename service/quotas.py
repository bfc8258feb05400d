"""Fair use per key: requests per time window (flask-limiter) and compute-seconds per day.

Request limits use flask-limiter's fixed-window strategy. Each key has its own allowance
(``requests_per_minute`` in its record, else ``HEATPATH_REQUESTS_PER_MINUTE``) per window of
``HEATPATH_RATE_WINDOW_S`` seconds (60 by default; the limit is scaled to the window). Callers
without a key exist only on an open server (loopback, or explicitly allowed), i.e. one person's
own machine: they are not limited, so a script looping over points on a laptop is never
throttled. The counters live in
``HEATPATH_RATE_LIMIT_STORAGE``: by default a table in the SQLite store (registered below as the
``heatpath-sqlite://`` scheme of the ``limits`` package), so every gunicorn worker on the
machine shares them and limits are exact; ``redis://...`` makes them exact across hosts.

Compute-seconds: the time spent in the numerical core for a key (synchronous requests and its
jobs) is added to a per-day counter in the store (UTC days); once the day's allowance
(``compute_seconds_per_day`` of the key, else ``HEATPATH_COMPUTE_SECONDS_PER_DAY``) is used
up, new computations are refused until midnight UTC. Cached results cost nothing.

Both refusals are 429 problem details with ``Retry-After`` in seconds (RFC 9110, 10.2.3).
"""

from __future__ import annotations

import math
import sqlite3
import time
from pathlib import Path
from typing import Any

from flask import Flask, Response, current_app, g, request
from flask_limiter import Limiter, RateLimitExceeded
from limits.storage import Storage

from service.errors import ProblemError, problem_response, problem_type

DAY_S = 86400


class QuotaError(ProblemError):
    """429 problem with a ``Retry-After`` delay in whole seconds."""

    def __init__(self, slug: str, title: str, detail: str, retry_after_s: float) -> None:
        super().__init__(429, slug, title, detail)
        self.retry_after_s = max(1, math.ceil(retry_after_s))


class SqliteLimitStorage(Storage):
    """Fixed-window counters of the ``limits`` package in a table of the SQLite store."""

    STORAGE_SCHEME = ["heatpath-sqlite"]  # noqa: RUF012 (the limits package reads this class attribute)

    def __init__(self, uri: str | None = None, wrap_exceptions: bool = False, **options: Any) -> None:
        super().__init__(uri, wrap_exceptions=wrap_exceptions, **options)
        self.path = (uri or "").removeprefix("heatpath-sqlite:///")
        Path(self.path).parent.mkdir(parents=True, exist_ok=True)
        self._conn: sqlite3.Connection | None = None
        self._pid = 0

    @property
    def base_exceptions(self) -> type[Exception]:
        return sqlite3.Error

    def _db(self) -> sqlite3.Connection:
        import os

        if self._conn is None or self._pid != os.getpid():
            self._conn = sqlite3.connect(self.path, timeout=30, isolation_level=None, check_same_thread=False)
            self._conn.execute("PRAGMA journal_mode = WAL")
            self._conn.execute("CREATE TABLE IF NOT EXISTS hp_limits "
                               "(key TEXT PRIMARY KEY, count INTEGER NOT NULL, expires_at REAL NOT NULL)")
            self._pid = os.getpid()
        return self._conn

    def incr(self, key: str, expiry: int, amount: int = 1) -> int:
        now = time.time()
        row = self._db().execute(
            "INSERT INTO hp_limits VALUES (?, ?, ?) ON CONFLICT(key) DO UPDATE SET "
            "count = CASE WHEN expires_at <= ? THEN excluded.count ELSE count + excluded.count END, "
            "expires_at = CASE WHEN expires_at <= ? THEN excluded.expires_at ELSE expires_at END RETURNING count",
            (key, amount, now + expiry, now, now)).fetchone()
        return int(row[0])

    def get(self, key: str) -> int:
        row = self._db().execute("SELECT count FROM hp_limits WHERE key = ? AND expires_at > ?",
                                 (key, time.time())).fetchone()
        return 0 if row is None else int(row[0])

    def get_expiry(self, key: str) -> float:
        row = self._db().execute("SELECT expires_at FROM hp_limits WHERE key = ?", (key,)).fetchone()
        return time.time() if row is None else float(row[0])

    def check(self) -> bool:
        try:
            self._db().execute("SELECT 1").fetchone()
        except sqlite3.Error:
            return False
        return True

    def reset(self) -> int | None:
        return self._db().execute("DELETE FROM hp_limits").rowcount

    def clear(self, key: str) -> None:
        self._db().execute("DELETE FROM hp_limits WHERE key = ?", (key,))


def principal() -> str:
    """Who is counted: the key id, or the client address on an open server."""
    key_id = getattr(g, "key_id", None)
    return f"key:{key_id}" if key_id else f"addr:{request.remote_addr or 'unknown'}"


def _request_limit() -> str:
    key = getattr(g, "key", None) or {}
    per_minute = key.get("requests_per_minute") or current_app.config["HEATPATH_REQUESTS_PER_MINUTE"]
    window = current_app.config["HEATPATH_RATE_WINDOW_S"]
    return f"{max(1, round(per_minute * window / 60))} per {window} second"


def _exempt() -> bool:
    """Limits are per key: open endpoints and callers without a key (an open server) are not counted."""
    from service.auth import OPEN_ENDPOINTS

    return (request.endpoint in OPEN_ENDPOINTS or request.routing_exception is not None
            or getattr(g, "key_id", None) is None)


def _rate_limited(exc: RateLimitExceeded) -> Response:
    limiter: Limiter = current_app.extensions["heatpath_limiter"]
    current = limiter.current_limit
    retry = current.reset_at - time.time() if current else current_app.config["HEATPATH_RATE_WINDOW_S"]
    return problem_response(429, "Too many requests",
                            f"request limit reached ({exc.description}) for this key; retry after the window resets",
                            problem_type("rate-limited"), headers={"Retry-After": str(max(1, math.ceil(retry)))})


def _quota_problem(exc: QuotaError) -> Response:
    return problem_response(429, exc.title, exc.detail, problem_type(exc.slug),
                            headers={"Retry-After": str(exc.retry_after_s)})


def utc_day(now: float | None = None) -> str:
    return time.strftime("%Y-%m-%d", time.gmtime(time.time() if now is None else now))


def seconds_to_midnight(now: float | None = None) -> float:
    now = time.time() if now is None else now
    return DAY_S - now % DAY_S


def compute_allowance(key: dict[str, Any] | None, default: float) -> float:
    return float((key or {}).get("compute_seconds_per_day") or default)


def check_compute_budget(store: Any, who: str, key: dict[str, Any] | None) -> None:
    """Refuse (429) when the key has used its compute-seconds for today (callers without a key are not limited)."""
    if key is None:
        return
    allowance = compute_allowance(key, current_app.config["HEATPATH_COMPUTE_SECONDS_PER_DAY"])
    used = store.counter(f"compute:{who}:{utc_day()}")
    if used >= allowance:
        raise QuotaError("compute-quota-exceeded", "Compute quota exceeded",
                           f"this key has used {used:.1f} of its {allowance:g} compute-seconds for today (UTC); "
                           "cached results remain available", seconds_to_midnight())


def charge_compute(store: Any, who: str, seconds: float, when: float | None = None) -> float:
    """Add ``seconds`` of solver time to ``who``'s counter for the UTC day of ``when``; the day's total."""
    return store.add(f"compute:{who}:{utc_day(when)}", seconds, 2 * DAY_S)


def init_app(app: Flask) -> Limiter:
    """Attach flask-limiter (after the key check, whose result it counts by)."""
    limiter = Limiter(principal, app=app, default_limits=[_request_limit], default_limits_exempt_when=_exempt,
                      storage_uri=app.config["HEATPATH_RATE_LIMIT_STORAGE"], strategy="fixed-window",
                      headers_enabled=False, key_prefix="heatpath")
    app.extensions["heatpath_limiter"] = limiter
    app.register_error_handler(RateLimitExceeded, _rate_limited)
    app.register_error_handler(QuotaError, _quota_problem)
    return limiter
