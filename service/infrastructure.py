"""Wiring of the shared-endpoint machinery into an app: store, queue, cache, keys, quotas, operations.

:func:`init_app` is called once by :func:`service.create_app`; the objects it builds are
reachable as :func:`current` (``app.extensions["heatpath"]``). The job worker builds the same
objects through the same app factory, so both sides agree on every setting.

Queue (``HEATPATH_QUEUE``): a SQLite file (huey's ``SqliteHuey``, the default, beside the store),
``redis://...`` (``RedisHuey``), ``memory`` (in-process, nothing runs it unless a consumer is
started in the same process) or ``immediate`` (tasks run at once in the requesting process: for
tests and single-process use).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from flask import Flask, current_app
from huey import MemoryHuey, RedisHuey, SqliteHuey, crontab
from huey.api import Huey

from service import auth, jobs, operations, quotas
from service.cache import ResultCache
from service.settings import is_redis, resolve, sqlite_path
from service.store import SqliteStore, Store, open_store

QUEUE_NAME = "heatpath"


@dataclass
class Infrastructure:
    """What the service layer shares between requests and with the job workers."""

    app: Flask
    settings: dict[str, Any]
    store: Store
    queue: Huey
    cache: ResultCache
    run_task: Any = field(default=None)

    def purge(self) -> None:
        """Drop expired records (SQLite; Redis expires them by itself)."""
        if isinstance(self.store, SqliteStore):
            self.store.purge_expired()


def make_queue(setting: str) -> Huey:
    """The huey instance named by a ``HEATPATH_QUEUE`` setting."""
    options = {"results": False, "utc": True}
    if setting in ("memory", "immediate"):
        return MemoryHuey(QUEUE_NAME, immediate=setting == "immediate", **options)
    if is_redis(setting):
        return RedisHuey(QUEUE_NAME, url=setting, **options)
    Path(sqlite_path(setting)).resolve().parent.mkdir(parents=True, exist_ok=True)
    return SqliteHuey(QUEUE_NAME, filename=sqlite_path(setting), timeout=30, **options)


def build(app: Flask, settings: dict[str, Any]) -> Infrastructure:
    store = open_store(settings["HEATPATH_STORE"])
    queue = make_queue(settings["HEATPATH_QUEUE"])
    infra = Infrastructure(app, settings, store, queue, ResultCache(store, settings["HEATPATH_CACHE_MAX_BYTES"]))
    infra.run_task = queue.task(name="heatpath.run_job", retries=0)(lambda job_id: jobs.run_job(infra, job_id))

    @queue.periodic_task(crontab(minute="*"), name="heatpath.housekeeping")
    def housekeeping() -> None:  # backstop for jobs nobody polls; runs in the job worker once a minute
        jobs.reap_stalled(infra)
        infra.purge()

    return infra


def current() -> Infrastructure:
    """The infrastructure of the running app."""
    return current_app.extensions["heatpath"]


def init_app(app: Flask) -> None:
    """Resolve the settings into ``app.config`` and install keys, quotas, jobs and operations."""
    settings = resolve(app.config)
    if settings["HEATPATH_AUTH"] not in ("auto", "required"):
        raise SystemExit(f"heatpath: HEATPATH_AUTH must be 'auto' or 'required', not {settings['HEATPATH_AUTH']!r}")
    app.config.update(settings)
    app.extensions["heatpath"] = build(app, settings)
    operations.init_app(app)  # request id and metrics hooks first: they see every request
    auth.init_app(app)
    quotas.init_app(app)
    app.register_blueprint(jobs.blueprint, url_prefix="/v1")
