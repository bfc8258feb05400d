"""Helpers for the shared-endpoint tests: a tiny job-capable computation and apps that serve it.

``count_squares`` stands in for a long table build: it walks ``points`` steps, sleeping
``delay_s`` in each and reporting progress, and returns a deterministic sum. It is reached
through the same :func:`service.jobs.run_or_enqueue` call that real endpoints use, at
``POST /v1/_test/count`` (registered only by :func:`create_app` here, never in production).
"""

from __future__ import annotations

import time
from typing import Any

from flask import Flask, request

from service import create_app as create_service_app
from service.jobs import run_or_enqueue
from thermo.errors import ConvergenceError

COUNT_URL = "/v1/_test/count"


def count_squares(params: dict[str, Any], progress) -> dict[str, Any]:
    """Sum of i² for i < points, one point at a time (``fail`` makes it raise like a stuck solver)."""
    n, delay = int(params["points"]), float(params.get("delay_s", 0.0))
    total = 0
    for i in range(n):
        if delay:
            time.sleep(delay)
        total += i * i
        progress(i + 1, n)
    if params.get("fail"):
        raise ConvergenceError("test computation told to fail", {"points": n})
    return {"points": n, "sum_of_squares": total}


def add_count_endpoint(app: Flask) -> Flask:
    @app.post(COUNT_URL)
    def _count():
        body = request.get_json()
        return run_or_enqueue("test/count", body, count_squares, size=int(body["points"]))

    return app


def create_app(config: dict[str, Any] | None = None) -> Flask:
    """The service app plus the test endpoint (gunicorn: ``tests.service.team_support:create_app()``)."""
    return add_count_endpoint(create_service_app(config))


def make_app(tmp_path, **config: Any) -> Flask:
    """A testing app with the count endpoint, its own SQLite store in ``tmp_path`` and jobs run in-process."""
    settings = {"TESTING": True, "HEATPATH_STORE": str(tmp_path / "store.sqlite3"), "HEATPATH_QUEUE": "immediate"}
    return create_app({**settings, **config})


def bearer(key: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {key}"}
