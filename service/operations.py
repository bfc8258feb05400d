"""Operations: request ids, the request log, Prometheus metrics, ``/v1/ready`` and ``/metrics``.

Every response carries ``X-Request-Id``: the caller's (or the reverse proxy's) value when it is
a plain token of at most 128 characters, else a fresh random id. The same id is in the JSON log
line of the request, so a user's report can be matched with the server's log.

``/v1/ready`` answers 200 only when the default dataset loads and the store and the job queue
answer (503 problem details naming the failed checks otherwise), so a load balancer can take a
host out of rotation; it also reports how many job workers have shown a sign of life in the
last 30 s. ``/metrics`` serves Prometheus text (see :mod:`service.metrics`).
"""

from __future__ import annotations

import logging
import os
import re
import time
import uuid
from typing import Any

from flask import Blueprint, Flask, Response, current_app, g, request
from prometheus_client import CONTENT_TYPE_LATEST, REGISTRY, CollectorRegistry, generate_latest
from prometheus_client.core import GaugeMetricFamily

from service.errors import problem_response, problem_type
from service.metrics import LATENCY, REQUESTS
from service.negotiation import produces
from service.provenance import code_version

blueprint = Blueprint("operations", __name__)
request_log = logging.getLogger("heatpath.request")
REQUEST_ID = re.compile(r"^[A-Za-z0-9._:-]{1,128}$")
WORKER_SEEN_S = 30.0


def _start() -> None:
    incoming = request.headers.get("X-Request-Id", "")
    g.request_id = incoming if REQUEST_ID.match(incoming) else uuid.uuid4().hex
    g.started = time.perf_counter()


def _finish(response: Response) -> Response:
    response.headers["X-Request-Id"] = g.get("request_id") or uuid.uuid4().hex
    duration = time.perf_counter() - g.get("started", time.perf_counter())
    endpoint = request.url_rule.rule if request.url_rule is not None else "unmatched"
    status = str(response.status_code)
    REQUESTS.labels(endpoint, request.method, status).inc()
    LATENCY.labels(endpoint, status).observe(duration)
    request_log.info("request", extra={
        "request_id": response.headers["X-Request-Id"], "method": request.method, "path": request.path,
        "endpoint": endpoint, "status": response.status_code, "duration_ms": round(duration * 1000, 3),
        "key_id": g.get("key_id"), "remote_addr": request.remote_addr,
    })
    return response


class SharedStateCollector:
    """Figures read from shared state at scrape time: queue depth, jobs per state, cache size and hit ratio."""

    def __init__(self, app: Flask, registry: Any) -> None:
        self.app, self.registry = app, registry

    def collect(self) -> Any:
        infra = self.app.extensions["heatpath"]
        depth = GaugeMetricFamily("heatpath_job_queue_depth", "Job messages waiting in the queue.")
        depth.add_metric([], float(infra.queue.pending_count()))
        yield depth
        states = GaugeMetricFamily("heatpath_jobs", "Job records in the store, by state.", labels=["state"])
        counts = dict.fromkeys(("queued", "running", "succeeded", "failed", "cancelled"), 0)
        for _, d, _ in infra.store.scan("job"):
            counts[d["state"]] = counts.get(d["state"], 0) + 1
        for state, n in counts.items():
            states.add_metric([state], float(n))
        yield states
        entries, size = infra.store.cache_usage()
        yield GaugeMetricFamily("heatpath_cache_entries", "Results in the cache.", value=float(entries))
        yield GaugeMetricFamily("heatpath_cache_bytes", "Total size of the cached results.", value=float(size))
        lookups = {"hit": 0.0, "miss": 0.0, "corrupt": 0.0}
        for family in self.registry.collect():
            if family.name == "heatpath_cache_lookups":
                for sample in family.samples:
                    if sample.name.endswith("_total"):
                        lookups[sample.labels["result"]] += sample.value
        total = sum(lookups.values())
        ratio = lookups["hit"] / total if total else float("nan")
        yield GaugeMetricFamily("heatpath_cache_hit_ratio", "Cache hits / lookups since the server started "
                                "(NaN before the first lookup).", value=ratio)


@blueprint.get("/metrics")
@produces("text/plain")
def metrics() -> Response:
    """Prometheus metrics of all processes of this server."""
    if os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        from prometheus_client import multiprocess

        registry = CollectorRegistry()
        multiprocess.MultiProcessCollector(registry)
    else:
        registry = REGISTRY
    combined = CollectorRegistry()
    combined.register(_Forward(registry))
    combined.register(SharedStateCollector(current_app._get_current_object(), registry))
    return Response(generate_latest(combined), headers={"Content-Type": CONTENT_TYPE_LATEST})


class _Forward:
    """Re-expose another registry's metrics inside a combined registry."""

    def __init__(self, registry: Any) -> None:
        self.registry = registry

    def collect(self) -> Any:
        yield from self.registry.collect()


def _check(name: str, probe: Any, failures: list[str]) -> str:
    try:
        probe()
    except Exception as exc:
        failures.append(f"{name}: {exc}")
        return "failed"
    return "ok"


@blueprint.get("/v1/ready")
def ready() -> Any:
    """Readiness: dataset loaded, store and queue reachable."""
    from thermo.dataset import load_dataset

    infra = current_app.extensions["heatpath"]
    failures: list[str] = []
    checks = {
        "dataset": _check("dataset", load_dataset, failures),
        "store": _check("store", infra.store.ping, failures),
        "queue": _check("queue", infra.queue.pending_count, failures),
    }
    if failures:
        return problem_response(503, "Not ready", "; ".join(failures), problem_type("not-ready"), checks=checks)
    now = time.time()
    workers = sum(1 for _, d, _ in infra.store.scan("worker") if d["seen_at"] > now - WORKER_SEEN_S)
    return {"status": "ready", "version": code_version(), "checks": checks, "job_workers_seen": workers}


def init_app(app: Flask) -> None:
    """Install the request-id, log and metrics hooks and the operations endpoints."""
    app.before_request_funcs.setdefault(None, []).insert(0, _start)  # before the Accept/size checks
    app.after_request(_finish)
    app.register_blueprint(blueprint)
