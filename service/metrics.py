"""Prometheus metrics of heatpath (exposed at ``/metrics`` by :mod:`service.operations`).

Counters and histograms are updated where the work happens (request hooks, the result cache,
:func:`service.jobs.run_or_enqueue` and the job runner). Under gunicorn every process (HTTP
workers and job workers) writes its values to files in ``PROMETHEUS_MULTIPROC_DIR`` (set by
service/gunicorn_conf.py before anything imports prometheus_client), and ``/metrics`` adds them
up with prometheus_client's multiprocess collector, so the figures are correct whichever worker
answers the scrape. Figures that describe shared state (queue depth, jobs per state, cache size
and hit ratio) are computed when scraped.
"""

from __future__ import annotations

from prometheus_client import Counter, Histogram

LATENCY_BUCKETS = (0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30, 60, 120)
SOLVER_BUCKETS = (0.001, 0.01, 0.05, 0.1, 0.5, 1, 5, 10, 30, 60, 300, 900, 3600)

REQUESTS = Counter("heatpath_http_requests", "HTTP requests answered, by route, method and status.",
                   ["endpoint", "method", "status"])
LATENCY = Histogram("heatpath_http_request_duration_seconds", "Time to answer an HTTP request, by route and status.",
                    ["endpoint", "status"], buckets=LATENCY_BUCKETS)
SOLVER = Histogram("heatpath_solver_seconds", "Time spent computing results in the numerical core.",
                   ["operation", "mode"], buckets=SOLVER_BUCKETS)
CACHE_LOOKUPS = Counter("heatpath_cache_lookups", "Result cache lookups: hit, miss, or corrupt (recomputed).",
                        ["result"])
JOBS_FINISHED = Counter("heatpath_jobs_finished", "Background jobs that ended, by final state.", ["state"])
