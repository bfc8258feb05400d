"""gunicorn settings for heatpath (``gunicorn --config service/gunicorn_conf.py "service:create_app()"``).

Environment overrides: ``HEATPATH_BIND`` (address, default 127.0.0.1:8000),
``HEATPATH_WORKERS`` (process count, default: CPU cores available to us),
``HEATPATH_JOB_WORKERS`` (job worker processes the master starts, default 1; 0 when the job
workers run elsewhere), and the store/queue/limit settings of :mod:`service.settings`.
The launcher (``run-service``, ``heatpath serve``) sets OPENBLAS_NUM_THREADS,
OMP_NUM_THREADS and MKL_NUM_THREADS to 1 so each worker's numpy uses one core.

Hooks (below): the master refuses to start open on a non-loopback address, starts and
supervises the job workers once it is ready (service/worker.py says why they are separate
processes), stops them on exit, and keeps Prometheus' multiprocess files right.
"""

from __future__ import annotations

import os
import shutil
import sys
import tempfile

# Prometheus multiprocess mode: every process (HTTP workers, job workers) writes its metric
# values to files in this directory and /metrics adds them up. It must be set before anything
# imports prometheus_client (the app is preloaded just after this file is read) and start
# empty; a private directory per server keeps two servers on one machine apart.
_OWN_METRICS_DIR = "PROMETHEUS_MULTIPROC_DIR" not in os.environ
if _OWN_METRICS_DIR:
    os.environ["PROMETHEUS_MULTIPROC_DIR"] = tempfile.mkdtemp(prefix="heatpath-metrics-")
else:
    for _stale in os.listdir(os.environ["PROMETHEUS_MULTIPROC_DIR"]):
        os.unlink(os.path.join(os.environ["PROMETHEUS_MULTIPROC_DIR"], _stale))


def _cores() -> int:
    try:
        return len(os.sched_getaffinity(0))  # respects CPU affinity / container pinning
    except AttributeError:  # platforms without sched_getaffinity
        return os.cpu_count() or 1


# Loopback by default: the service has no authentication yet, so it is not exposed
# to the network unless the operator asks for it.
bind = os.environ.get("HEATPATH_BIND", "127.0.0.1:8000")

# The work is CPU-bound numpy/scipy: one single-threaded process per core keeps
# every core busy without oversubscription (the common "2 × cores + 1" rule is
# for I/O-bound apps). BLAS threads are pinned to 1 by the launcher for the same reason.
workers = int(os.environ.get("HEATPATH_WORKERS", _cores()))

# Threads give no parallelism to CPU-bound Python under the GIL; one per worker
# (sync worker) keeps requests isolated and memory predictable.
worker_class = "sync"
threads = 1

# Some calculations (equilibria, cooling paths) take seconds; allow up to two
# minutes before a worker is deemed stuck and restarted. Longer work belongs in jobs.
timeout = 120

# On shutdown or reload, give in-flight calculations 30 s to finish.
graceful_timeout = 30

# Recycle each worker after ~1000 requests (jitter spreads restarts so workers do
# not all restart at once) to bound the growth of caches and fragmented memory.
max_requests = 1000
max_requests_jitter = 100

# Import the app (and numpy/scipy) once in the master before forking: faster
# worker start and copy-on-write sharing of the loaded modules; import errors
# stop the server at start instead of looping worker restarts.
preload_app = True

# Structured JSON logs on stderr, where a process supervisor collects them. gunicorn's own
# access log is off: the app logs every request as JSON with its request id, route, status,
# duration and key id (service/operations.py), which replaces it.
accesslog = None
errorlog = "-"
logconfig_dict = __import__("service.logs", fromlist=["logging_config"]).logging_config(
    json_format=os.environ.get("HEATPATH_LOG_FORMAT", "json") == "json")

# No runtime control socket (gunicorn >= 27 creates one under the home directory by
# default): nothing here uses it, and several instances (tests, a developer's server)
# would otherwise compete for the same path.
control_socket_disable = True


# --- hooks ---------------------------------------------------------------------------------------

_supervisor = None


def on_starting(server):
    """Compiled kernels ready before workers fork; auth policy: never open to the network by accident."""
    from thermo.kernels import warm_up

    warm_up()  # forked workers inherit the compiled code (numba caches it on disk for later starts)

    from service.auth import has_active_keys
    from service.settings import is_exposed, resolve
    from service.store import open_store

    exposed = [a for a in server.cfg.address if is_exposed(a)]
    if not exposed:
        return
    settings = resolve()
    if not has_active_keys(open_store(settings["HEATPATH_STORE"])):
        if not settings["HEATPATH_ALLOW_OPEN"]:
            server.log.error("REFUSING TO START: listening on %s without any API key. Create one with "
                             "'heatpath keys create --owner ...', bind to 127.0.0.1, or set HEATPATH_ALLOW_OPEN=1 "
                             "to serve the network without authentication.", exposed)
            sys.exit(2)
        server.log.warning("!" * 78)
        server.log.warning("WARNING: serving %s WITHOUT AUTHENTICATION (HEATPATH_ALLOW_OPEN=1). Anyone who can "
                           "reach this address can use the service and its compute time.", exposed)
        server.log.warning("!" * 78)
        return
    # Keys exist: require one on every request, even if all keys are later revoked.
    os.environ["HEATPATH_AUTH"] = "required"
    app = getattr(server.app, "callable", None)  # the preloaded app, already configured
    if app is not None and hasattr(app, "config"):
        app.config["HEATPATH_AUTH"] = "required"


def when_ready(server):
    """Start the job workers the default setup needs (none if HEATPATH_JOB_WORKERS=0)."""
    global _supervisor
    from service.settings import resolve
    from service.worker import WorkerSupervisor

    count = resolve()["HEATPATH_JOB_WORKERS"]
    if count > 0:
        _supervisor = WorkerSupervisor(count, server.log)
        _supervisor.start()


def child_exit(server, worker):
    """A dead worker's live gauges must not linger in the multiprocess files."""
    from prometheus_client import multiprocess

    multiprocess.mark_process_dead(worker.pid)


def on_exit(server):
    """Stop the job workers (they finish their current job within the graceful timeout)."""
    if _supervisor is not None:
        _supervisor.stop(timeout=graceful_timeout)
    if _OWN_METRICS_DIR:
        shutil.rmtree(os.environ["PROMETHEUS_MULTIPROC_DIR"], ignore_errors=True)
