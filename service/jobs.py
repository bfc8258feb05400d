"""Background jobs, the result cache in front of every computation, and ``/v1/jobs``.

Endpoints make a computation cacheable and job-capable with one call::

    return run_or_enqueue("v1/cooling_path", params, compute_cooling_path, size=len(temperatures))

where ``params`` is the parsed request (JSON values only) and ``compute_cooling_path(params,
progress)`` is a module-level function returning the result dict (with its ``provenance``);
it may call ``progress(points_done, points_total)`` now and then. :func:`run_or_enqueue`:

1. answers ``304 Not Modified`` when ``If-None-Match`` carries the result's ETag (the result
   is determined by operation, request, dataset checksum and code version: see
   :mod:`service.cache`);
2. with ``"async": true`` in the request, or ``size`` above ``HEATPATH_ASYNC_THRESHOLD``,
   creates a job and answers ``202 Accepted`` with ``Location: /v1/jobs/<id>`` (a cached result
   makes the job finished at once);
3. otherwise serves the cached body, or computes, caches and serves it (``200``, ``ETag``).

An operation whose result has other representations (CSV, netCDF, a figure) registers a
renderer per media type with :func:`register_renderer`; :func:`negotiate` then answers the
synchronous request, and ``GET /v1/jobs/<id>/result`` the job's result, in the media type the
``Accept`` header prefers (the result itself is kept as JSON; the others are drawn from it).

Jobs are queued with huey (SQLite queue file by default, Redis for scale-out) and run by
``heatpath worker`` processes (started by the gunicorn master in the default setup). The job
*record* lives in the store, so every API process sees the same state, progress and result.
A running job beats a heartbeat into its record; when a worker dies (killed, out of memory,
host lost) the heartbeat stops, and after ``HEATPATH_JOB_STALL_S`` the job is queued again, up
to ``HEATPATH_JOB_MAX_ATTEMPTS`` runs in all, after which it ends ``failed`` with the reason:
a job never silently disappears or stays ``running`` forever. Finished jobs and their results
are kept for ``HEATPATH_JOB_RETENTION_S``. A key sees only its own jobs (others are 404).
"""

from __future__ import annotations

import importlib
import logging
import os
import socket
import threading
import time
import uuid
from collections.abc import Callable
from typing import Any, ClassVar

from flask import Blueprint, Response, current_app, g, request, url_for
from marshmallow import Schema, fields
from werkzeug.exceptions import NotAcceptable

from service.cache import encode_result, result_key
from service.errors import ProblemError, not_found
from service.metrics import JOBS_FINISHED, SOLVER
from service.negotiation import JSON_MEDIA_TYPE, produces
from service.provenance import code_version
from service.quotas import charge_compute, check_compute_budget, principal

log = logging.getLogger("heatpath.jobs")
blueprint = Blueprint("jobs", __name__)

FINISHED = ("succeeded", "failed", "cancelled")
#: Attribute under which :func:`async_field` loads the request's ``"async"`` flag.
ASYNC_ATTRIBUTE = "run_async"
Compute = Callable[[dict[str, Any], Callable[[int, int], None]], dict[str, Any]]


class JobCancelledError(Exception):
    """Raised inside a running computation (by its progress callback) once the job is cancelled."""


class StrictBoolean(fields.Boolean):
    """A JSON ``true`` or ``false`` only (``fields.Boolean`` also takes 1, 0, "yes", and ``{True}`` still matches 1)."""

    default_error_messages: ClassVar[dict[str, str]] = {"invalid": "must be true or false"}

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> bool:
        if not isinstance(value, bool):
            raise self.make_error("invalid")
        return value


def async_field() -> fields.Boolean:
    """The ``"async"`` member for request schemas of job-capable endpoints (loads as ``run_async``)."""
    return StrictBoolean(data_key="async", attribute=ASYNC_ATTRIBUTE, load_default=False,
                         metadata={"description": "run as a background job (202 Accepted) even if small"})


#: Base schema for request bodies of job-capable endpoints: adds the ``"async"`` member.
JobOptions = Schema.from_dict({"async": async_field()}, name="JobOptions")


def compute_ref(compute: Compute) -> str:
    """``module:qualname`` of a module-level function (how a job worker finds it)."""
    ref = f"{compute.__module__}:{compute.__qualname__}"
    if "<" in ref:
        raise TypeError(f"{ref} is not a module-level function; job workers could not import it")
    return ref


def resolve_compute(ref: str) -> Compute:
    module, _, name = ref.partition(":")
    target: Any = importlib.import_module(module)
    for part in name.split("."):
        target = getattr(target, part)
    return target


def iso(ts: float | None) -> str | None:
    """RFC 3339 UTC timestamp."""
    return None if ts is None else time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(ts)) + f".{int(ts % 1 * 1000):03d}Z"


# --- the job runner (job worker processes, or in-process when the queue runs tasks immediately) ---

class Heartbeat(threading.Thread):
    """Writes heartbeat and progress of a running job to its record; notices cancellation."""

    def __init__(self, infra: Any, job_id: str, attempt: int) -> None:
        super().__init__(name=f"heartbeat-{job_id[:8]}", daemon=True)
        self.infra, self.job_id, self.attempt = infra, job_id, attempt
        self.interval = min(1.0, infra.settings["HEATPATH_JOB_STALL_S"] / 4)
        self.done_total: tuple[int, int] | None = None
        self.cancelled, self.stopped = threading.Event(), threading.Event()

    def progress(self, done: int, total: int) -> None:
        """Progress callback handed to the computation."""
        self.done_total = (int(done), int(total))
        if self.cancelled.is_set():
            raise JobCancelledError(self.job_id)

    def beat(self) -> None:
        def change(d: dict[str, Any]) -> dict[str, Any] | None:
            if d["state"] != "running" or d["attempts"] != self.attempt:
                self.cancelled.set()
                return None
            new = {**d, "heartbeat_at": time.time()}
            if self.done_total:
                new["points_done"], new["points_total"] = self.done_total
            return new

        self.infra.store.modify("job", self.job_id, change)

    def run(self) -> None:
        while not self.stopped.wait(self.interval):
            try:
                self.beat()
            except Exception:  # a store hiccup must not kill the job; the next beat retries
                log.warning("heartbeat of job %s failed", self.job_id, exc_info=True)


def worker_name() -> str:
    return f"{socket.gethostname()}:{os.getpid()}"


def _claim(infra: Any, job_id: str) -> dict[str, Any] | None:
    now = time.time()

    def change(d: dict[str, Any]) -> dict[str, Any] | None:
        if d["state"] != "queued":
            return None
        return {**d, "state": "running", "started_at": d["started_at"] or now, "attempts": d["attempts"] + 1,
                "heartbeat_at": now, "worker": worker_name()}

    return infra.store.modify("job", job_id, change)


def _finish(infra: Any, job_id: str, attempt: int, state: str, **fields_: Any) -> bool:
    def change(d: dict[str, Any]) -> dict[str, Any] | None:
        if d["state"] != "running" or d["attempts"] != attempt:
            return None
        new = {**d, "state": state, "finished_at": time.time(), **fields_}
        if state == "succeeded":
            new["points_done"] = new["points_total"]
        return new

    retention = infra.settings["HEATPATH_JOB_RETENTION_S"]
    done = infra.store.modify("job", job_id, change, ttl_s=lambda _: retention) is not None
    if done:
        JOBS_FINISHED.labels(state).inc()
    return done


def render_problem(app: Any, exc: Exception) -> dict[str, Any]:
    """The problem details the API would have answered for ``exc`` (service/errors.py mapping)."""
    with app.test_request_context():
        try:
            response = app.handle_user_exception(exc)
            return response.get_json()
        except Exception:
            log.exception("job computation failed")
            return {"type": app.config["PROBLEM_TYPE_BASE"] + "internal-error", "title": "Internal error",
                    "status": 500, "detail": "the calculation failed; the error has been logged"}


def run_job(infra: Any, job_id: str) -> None:
    """Run one job to its end (called by the queue with the job id)."""
    job = _claim(infra, job_id)
    if job is None:  # cancelled while queued, already taken, or expired
        return
    beat = Heartbeat(infra, job_id, job["attempts"])
    beat.start()
    started = time.perf_counter()
    try:
        result = resolve_compute(job["compute"])(job["params"], beat.progress)
        body = encode_result(result)
    except JobCancelledError:
        return
    except Exception as exc:
        _finish(infra, job_id, job["attempts"], "failed", error=render_problem(infra.app, exc))
        return
    finally:
        elapsed = time.perf_counter() - started
        beat.stopped.set()
        beat.join()
        SOLVER.labels(job["operation"], "job").observe(elapsed)
        charge_compute(infra.store, job["owner"], elapsed)
    infra.cache.put(job["cache_key"], body)
    retention = infra.settings["HEATPATH_JOB_RETENTION_S"]
    infra.store.delete("result", job_id)
    infra.store.create("result", job_id, {"body": body.decode("utf-8")}, ttl_s=retention)
    _finish(infra, job_id, job["attempts"], "succeeded", compute_seconds=elapsed)


def _worker_lost(infra: Any, d: dict[str, Any]) -> dict[str, Any]:
    base = infra.app.config["PROBLEM_TYPE_BASE"]
    detail = (f"the worker running this job stopped without finishing it (killed, out of memory or its host "
              f"was lost) {d['attempts']} time(s); the limit is {infra.settings['HEATPATH_JOB_MAX_ATTEMPTS']} "
              f"attempts. Last worker: {d.get('worker')}")
    return {"type": base + "worker-lost", "title": "Job worker lost", "status": 500, "detail": detail}


def reap_stalled(infra: Any, job_ids: list[str] | None = None) -> int:
    """Requeue (or fail, after the last attempt) running jobs whose heartbeat stopped; the number handled."""
    stall, limit = infra.settings["HEATPATH_JOB_STALL_S"], infra.settings["HEATPATH_JOB_MAX_ATTEMPTS"]
    now, retention = time.time(), infra.settings["HEATPATH_JOB_RETENTION_S"]

    def keep(d: dict[str, Any]) -> float | None:
        return retention if d["state"] == "failed" else None

    if job_ids is None:
        candidates = [(i, d) for i, d, _ in infra.store.scan("job")]
    else:
        candidates = [(i, found[0]) for i in job_ids if (found := infra.store.get("job", i))]
    handled = 0
    for job_id, data in candidates:
        if data["state"] != "running" or data["heartbeat_at"] > now - stall:
            continue

        def change(d: dict[str, Any]) -> dict[str, Any] | None:
            if d["state"] != "running" or d["heartbeat_at"] > now - stall:
                return None
            note = f"{iso(now)}: worker {d.get('worker')} stopped during attempt {d['attempts']}"
            if d["attempts"] >= limit:
                return {**d, "state": "failed", "finished_at": now, "error": _worker_lost(infra, d),
                        "notes": [*d["notes"], note]}
            return {**d, "state": "queued", "notes": [*d["notes"], note + "; queued again"]}

        new = infra.store.modify("job", job_id, change, ttl_s=keep)
        if new is None:
            continue
        handled += 1
        log.warning("job %s: %s", job_id, new["notes"][-1])
        if new["state"] == "queued":
            infra.run_task(job_id)
        else:
            JOBS_FINISHED.labels("failed").inc()
    return handled


# --- creating jobs and answering requests ---------------------------------------------------------

def create_job(infra: Any, operation: str, compute: Compute, params: dict[str, Any], key: str, size: int,
               cached: bytes | None) -> dict[str, Any]:
    """Record a new job and queue it (or finish it at once from a cached body)."""
    job_id, now = uuid.uuid4().hex, time.time()
    job = {
        "id": job_id, "owner": principal(), "operation": operation, "compute": compute_ref(compute),
        "params": params, "cache_key": key, "state": "queued", "created_at": now, "started_at": None,
        "finished_at": None, "heartbeat_at": None, "points_done": 0, "points_total": max(1, int(size)),
        "attempts": 0, "worker": None, "error": None, "notes": [], "compute_seconds": None,
    }
    retention = infra.settings["HEATPATH_JOB_RETENTION_S"]
    if cached is not None:
        job.update(state="succeeded", started_at=now, finished_at=now, points_done=job["points_total"],
                   compute_seconds=0.0, notes=["served from the result cache"])
        infra.store.create("result", job_id, {"body": cached.decode("utf-8")}, ttl_s=retention)
        infra.store.create("job", job_id, job, ttl_s=retention)
        return job
    infra.store.create("job", job_id, job)
    try:
        infra.run_task(job_id)
    except Exception as exc:
        log.exception("could not queue job %s", job_id)
        infra.store.delete("job", job_id)
        raise ProblemError(503, "queue-unavailable", "Job queue unavailable",
                           "the job queue cannot be reached; try again later") from exc
    return infra.store.get("job", job_id)[0]


def _async_requested(params: dict[str, Any]) -> bool:
    if params.get(ASYNC_ATTRIBUTE) is True:
        return True
    body = request.get_json(silent=True) if request.is_json else None
    return isinstance(body, dict) and body.get("async") is True


def result_response(body: bytes, key: str, cache_state: str | None = None, status: int = 200) -> Response:
    response = current_app.response_class(body, status=status, mimetype="application/json")
    response.set_etag(key)
    if cache_state:
        response.headers["X-Heatpath-Cache"] = cache_state
    return response


# --- other representations of a result (CSV, netCDF, figures) -------------------------------------

Render = Callable[[dict[str, Any]], bytes]
#: operation → media type → (ETag suffix, function drawing that representation from the JSON result).
RENDERERS: dict[str, dict[str, tuple[str, Render]]] = {}


def register_renderer(operation: str, media_type: str, etag_suffix: str, render: Render) -> None:
    """Offer ``operation``'s result also as ``media_type``, drawn by ``render(result_dict) -> bytes``.

    Called at import time by the module of the operation; ``GET /v1/jobs/<id>/result`` then
    offers the media type too (for jobs of that operation).
    """
    RENDERERS.setdefault(operation, {})[media_type] = (etag_suffix, render)
    get_result.produces = tuple(dict.fromkeys((*get_result.produces, media_type)))


def offered(operation: str) -> tuple[str, ...]:
    """Media types of ``operation``'s result, JSON first (for ``@produces``)."""
    return (JSON_MEDIA_TYPE, *RENDERERS.get(operation, {}))


def negotiate(operation: str, response: Response) -> Response:
    """A ``200`` JSON result in the media type the request's Accept prefers among :func:`offered`.

    Other responses (``202``, ``304``) pass unchanged. The rendered response carries the JSON
    result's ETag with the renderer's suffix (``<etag>.csv``); every response of an operation with
    several representations varies on Accept. 406 when the Accept header allows none of them.
    """
    media_types = offered(operation)
    best = request.accept_mimetypes.best_match(media_types) if request.accept_mimetypes else JSON_MEDIA_TYPE
    if best is None:
        raise NotAcceptable(f"this result is available as {', '.join(media_types)}; the Accept header "
                            f"({request.headers.get('Accept', '')!r}) allows none of them")
    if len(media_types) > 1:
        response.vary.add("Accept")
    if response.status_code != 200 or best == JSON_MEDIA_TYPE:
        return response
    suffix, render = RENDERERS[operation][best]
    rendered = current_app.response_class(render(response.get_json()), mimetype=best)
    rendered.vary.add("Accept")
    if "X-Heatpath-Cache" in response.headers:
        rendered.headers["X-Heatpath-Cache"] = response.headers["X-Heatpath-Cache"]
    etag = response.get_etag()[0]
    if etag:
        rendered.set_etag(f"{etag}.{suffix}")
    return rendered


def not_modified(key: str) -> Response:
    response = current_app.response_class(status=304)
    response.set_etag(key)
    return response


def run_or_enqueue(operation: str, request_dict: dict[str, Any], compute_fn: Compute, size: int = 1,
                   dataset: Any = None) -> Response:
    """Serve a deterministic computation through the cache, synchronously or as a job (module docstring).

    Parameters
    ----------
    operation : str
        Stable name of the operation (e.g. ``"v1/equilibrium"``); part of the cache key.
    request_dict : dict
        The parsed request (JSON values); an ``"async"`` flag in it is used and then dropped.
    compute_fn : callable
        Module-level ``compute_fn(params, progress) -> dict``.
    size : int
        Work size in points (temperatures x pressures ...); above ``HEATPATH_ASYNC_THRESHOLD``
        the request becomes a job.
    dataset : thermo.dataset.Dataset, optional
        The dataset used (default: the one named by ``request_dict["dataset_id"]``, else the default).
    """
    from service.infrastructure import current
    from thermo.dataset import DEFAULT_DATASET_ID, load_dataset

    infra = current()
    background = _async_requested(request_dict) or size > infra.settings["HEATPATH_ASYNC_THRESHOLD"]
    params = {k: v for k, v in request_dict.items() if k not in (ASYNC_ATTRIBUTE, "async")}
    dataset = dataset or load_dataset(params.get("dataset_id", DEFAULT_DATASET_ID))
    key = result_key(operation, params, dataset.checksum, code_version())
    if request.if_none_match.contains_weak(key) and not background:
        return not_modified(key)
    cached = infra.cache.get(key)
    if cached is None:
        check_compute_budget(infra.store, principal(), g.get("key"))
    if background:
        job = create_job(infra, operation, compute_fn, params, key, size, cached)
        response = current_app.json.response(job_view(job))
        response.status_code = 202
        response.headers["Location"] = url_for("jobs.get_job", job_id=job["id"])
        return response
    if cached is not None:
        return result_response(cached, key, "hit")
    started = time.perf_counter()
    try:
        result = compute_fn(params, lambda done, total: None)
    finally:
        elapsed = time.perf_counter() - started
        SOLVER.labels(operation, "sync").observe(elapsed)
        charge_compute(infra.store, principal(), elapsed)
    body = encode_result(result)
    infra.cache.put(key, body)
    return result_response(body, key, "miss")


# --- /v1/jobs ------------------------------------------------------------------------------------

def job_view(job: dict[str, Any], now: float | None = None) -> dict[str, Any]:
    """The public representation of a job record."""
    now = time.time() if now is None else now
    done, total, state = job["points_done"], job["points_total"], job["state"]
    started, finished = job["started_at"], job["finished_at"]
    elapsed = ((finished or now) - started) if started else 0.0
    remaining = None
    if state == "running" and done > 0:
        remaining = elapsed * (total - done) / done
    elif state in FINISHED:
        remaining = 0.0
    retention = current_app.config["HEATPATH_JOB_RETENTION_S"]
    links = {"self": url_for("jobs.get_job", job_id=job["id"])}
    if state == "succeeded":
        links["result"] = url_for("jobs.get_result", job_id=job["id"])
    return {
        "id": job["id"], "state": state, "operation": job["operation"],
        "created_at": iso(job["created_at"]), "started_at": iso(started), "finished_at": iso(finished),
        "expires_at": iso(finished + retention) if finished else None,
        "progress": {"fraction": 1.0 if state == "succeeded" else (done / total if total else 0.0),
                     "points_done": done, "points_total": total, "elapsed_s": elapsed,
                     "remaining_estimate_s": remaining},
        "attempts": job["attempts"], "error": job["error"], "notes": job["notes"], "links": links,
    }


def _own_job(job_id: str) -> dict[str, Any]:
    from service.infrastructure import current

    infra = current()
    reap_stalled(infra, [job_id])
    found = infra.store.get("job", job_id)
    if found is None or found[0]["owner"] != principal():
        raise not_found("job_id", f"no job {job_id!r} for this key (unknown, expired, or another key's job)")
    return found[0]


@blueprint.get("/jobs")
def list_jobs() -> dict[str, Any]:
    """The caller's jobs, newest first."""
    from service.infrastructure import current

    mine = [d for _, d, _ in current().store.scan("job") if d["owner"] == principal()]
    mine.sort(key=lambda d: d["created_at"], reverse=True)
    return {"jobs": [job_view(d) for d in mine]}


@blueprint.get("/jobs/<job_id>")
def get_job(job_id: str) -> dict[str, Any]:
    """State and progress of one job."""
    return job_view(_own_job(job_id))


@blueprint.delete("/jobs/<job_id>")
def cancel_job(job_id: str) -> dict[str, Any]:
    """Cancel a queued or running job (a running computation stops at its next progress report)."""
    from service.infrastructure import current

    infra = current()
    job = _own_job(job_id)
    if job["state"] in FINISHED:
        raise ProblemError(409, "job-finished", "Job already finished",
                           f"job {job_id} has already ended ({job['state']}); nothing to cancel")
    retention = infra.settings["HEATPATH_JOB_RETENTION_S"]

    def change(d: dict[str, Any]) -> dict[str, Any] | None:
        if d["state"] in FINISHED:
            return None
        return {**d, "state": "cancelled", "finished_at": time.time(), "notes": [*d["notes"], "cancelled by its owner"]}

    new = infra.store.modify("job", job_id, change, ttl_s=lambda _: retention)
    if new is None:
        raise ProblemError(409, "job-finished", "Job already finished",
                           f"job {job_id} ended before it could be cancelled")
    JOBS_FINISHED.labels("cancelled").inc()
    return job_view(new)


@blueprint.get("/jobs/<job_id>/result")
@produces(JSON_MEDIA_TYPE)  # extended by register_renderer
def get_result(job_id: str) -> Response:
    """The result of a finished job (the same body and ETag as the synchronous answer), negotiated like it."""
    from service.infrastructure import current

    job = _own_job(job_id)
    if job["state"] != "succeeded":
        what = "is still " + job["state"] if job["state"] not in FINISHED else f"ended {job['state']}: no result"
        where = url_for("jobs.get_job", job_id=job_id)
        raise ProblemError(409, "job-not-succeeded", "No result", f"job {job_id} {what}; see {where}")
    if request.if_none_match.contains_weak(job["cache_key"]):
        return not_modified(job["cache_key"])
    found = current().store.get("result", job_id)
    if found is None:
        raise not_found("job_id", f"the result of job {job_id} has expired")
    return negotiate(job["operation"], result_response(found[0]["body"].encode("utf-8"), job["cache_key"]))
