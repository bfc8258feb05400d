"""Settings of the shared-endpoint machinery (store, keys, quotas, jobs, cache, operations).

Every setting is a Flask config key named like its environment variable; ``create_app(config)``
takes a value from ``config`` first, then from the environment, then the default below. The same
names configure the job worker (``heatpath worker``), the key commands (``heatpath keys``) and
the gunicorn hooks, so one environment describes one deployment. docs/operations.md lists them
with the scale-out recipe.

``HEATPATH_STORE`` chooses the embedded default or the shared one:

- a file path (default ``var/heatpath.sqlite3``) or ``sqlite:///path``: SQLite, no server;
- ``redis://host:port/db``: Redis holds keys, jobs, usage and the cache, and (unless
  ``HEATPATH_QUEUE`` / ``HEATPATH_RATE_LIMIT_STORAGE`` say otherwise) the job queue and the
  request counters as well;
- ``:memory:``: a private in-process store (what a ``TESTING`` app gets when none is named; such
  an app also has no result cache unless ``HEATPATH_CACHE_MAX_BYTES`` is given).
"""

from __future__ import annotations

import ipaddress
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

#: name → (default, type). ``None`` defaults are derived from the store by :func:`resolve`.
SETTINGS: dict[str, tuple[Any, type]] = {
    "HEATPATH_STORE": ("var/heatpath.sqlite3", str),
    "HEATPATH_QUEUE": (None, str),
    "HEATPATH_RATE_LIMIT_STORAGE": (None, str),
    # "auto": keys are required as soon as one active key exists; "required": always.
    "HEATPATH_AUTH": ("auto", str),
    "HEATPATH_ALLOW_OPEN": (False, bool),
    "HEATPATH_REQUESTS_PER_MINUTE": (120, int),
    "HEATPATH_RATE_WINDOW_S": (60, int),
    "HEATPATH_COMPUTE_SECONDS_PER_DAY": (3600.0, float),
    "HEATPATH_ASYNC_THRESHOLD": (500, int),
    # Request limits of the computing endpoints (422 naming the field and the limit above them).
    "HEATPATH_MAX_PATH_STEPS": (1000, int),
    "HEATPATH_MAX_TABLE_POINTS": (20000, int),
    "HEATPATH_MAX_ISENTROPE_POINTS": (200, int),
    "HEATPATH_JOB_RETENTION_S": (7 * 86400, int),
    "HEATPATH_JOB_STALL_S": (60.0, float),
    "HEATPATH_JOB_MAX_ATTEMPTS": (2, int),
    "HEATPATH_JOB_WORKERS": (1, int),
    "HEATPATH_CACHE_MAX_BYTES": (256 * 1024 * 1024, int),
    "HEATPATH_LOG_FORMAT": ("json", str),
}

TRUE_WORDS = ("1", "true", "yes", "on")


def _convert(name: str, raw: Any, kind: type) -> Any:
    if raw is None:
        return None
    if kind is bool:
        return raw if isinstance(raw, bool) else str(raw).strip().lower() in TRUE_WORDS
    if isinstance(raw, kind) and not isinstance(raw, bool):
        return raw
    try:
        return kind(raw)
    except (TypeError, ValueError) as exc:
        raise SystemExit(f"heatpath: setting {name}={raw!r} is not a valid {kind.__name__}") from exc


def resolve(config: Mapping[str, Any] | None = None, environ: Mapping[str, str] | None = None) -> dict[str, Any]:
    """All settings: from ``config``, else ``environ`` (default ``os.environ``), else the default."""
    config = config or {}
    environ = os.environ if environ is None else environ
    out: dict[str, Any] = {}
    for name, (default, kind) in SETTINGS.items():
        raw = config.get(name, environ.get(name, default))
        if config.get("TESTING") and "HEATPATH_STORE" not in config and "HEATPATH_STORE" not in environ:
            # A testing app that names no store gets a private one and no result cache, so tests
            # of the numerical endpoints see fresh computations (and patches of the core).
            if name not in config and name not in environ:
                raw = {"HEATPATH_STORE": ":memory:", "HEATPATH_CACHE_MAX_BYTES": 0}.get(name, raw)
        out[name] = _convert(name, raw, kind)
    store = out["HEATPATH_STORE"]
    if out["HEATPATH_QUEUE"] is None:
        out["HEATPATH_QUEUE"] = default_queue(store)
    if out["HEATPATH_RATE_LIMIT_STORAGE"] is None:
        out["HEATPATH_RATE_LIMIT_STORAGE"] = default_limit_storage(store)
    return out


def is_redis(url: str) -> bool:
    return url.startswith(("redis://", "rediss://", "unix://"))


def sqlite_path(store: str) -> str:
    """File path of a SQLite store setting (a plain path, ``sqlite:///relative`` or ``sqlite:////absolute``)."""
    return store[len("sqlite:///"):] if store.startswith("sqlite:///") else store


def default_queue(store: str) -> str:
    """The queue beside the store: the same Redis, a ``-queue`` SQLite file, or in memory."""
    if is_redis(store):
        return store
    if store == ":memory:":
        return "memory"
    path = Path(sqlite_path(store))
    return str(path.with_name(path.stem + "-queue" + (path.suffix or ".sqlite3")))


def default_limit_storage(store: str) -> str:
    """Request counters live in the store (exact across workers) unless it is private memory."""
    if is_redis(store):
        return store
    if store == ":memory:":
        return "memory://"
    return "heatpath-sqlite:///" + str(Path(sqlite_path(store)).resolve())


def is_exposed(address: object) -> bool:
    """True for a TCP listening address other than loopback (a Unix socket or file descriptor is local)."""
    if not isinstance(address, tuple):
        return False
    host = str(address[0]).strip("[]")
    if host == "localhost":
        return False
    try:
        return not ipaddress.ip_address(host).is_loopback
    except ValueError:  # a host name: it may resolve to anything
        return True
