"""gunicorn settings for heatpath (``gunicorn --config service/gunicorn_conf.py "service:create_app()"``).

Environment overrides: ``HEATPATH_BIND`` (address, default 127.0.0.1:8000),
``HEATPATH_WORKERS`` (process count, default: CPU cores available to us).
The launcher (``run-service``, ``heatpath serve``) sets OPENBLAS_NUM_THREADS,
OMP_NUM_THREADS and MKL_NUM_THREADS to 1 so each worker's numpy uses one core.
"""

from __future__ import annotations

import os


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

# Access and error logs to stdout/stderr, where a process supervisor collects them.
accesslog = "-"
errorlog = "-"

# No runtime control socket (gunicorn >= 27 creates one under the home directory by
# default): nothing here uses it, and several instances (tests, a developer's server)
# would otherwise compete for the same path.
control_socket_disable = True
