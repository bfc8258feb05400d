"""Job workers: ``heatpath worker`` (``python -m service.worker``), and their supervisor under gunicorn.

A job worker is a huey consumer over the configured queue, running jobs in ``--threads``
threads (one by default: the work is CPU-bound, so parallelism comes from more worker
processes, not threads). It builds the app from the same settings as the HTTP side, requeues
jobs whose worker died (see :func:`service.jobs.reap_stalled`) when it starts and once a
minute, and records a sign of life in the store every few seconds (``/v1/ready`` counts them).

In the default single-host setup the gunicorn master starts ``HEATPATH_JOB_WORKERS`` of these
processes when it is ready and stops them when it exits (:class:`WorkerSupervisor`, used by
service/gunicorn_conf.py); a worker that dies is started again within a second. Separate
processes rather than threads in the master keep CPU-bound numpy work away from the process
that supervises the HTTP workers, let the kernel kill one job runner without touching the
server, and are what runs on other machines in the scale-out setup (``heatpath worker`` there).
"""

from __future__ import annotations

import argparse
import logging
import logging.config
import os
import signal
import subprocess
import sys
import threading
import time
from collections.abc import Sequence
from typing import Any

from service.logs import logging_config

PRESENCE_INTERVAL_S = 5.0
PRESENCE_TTL_S = 30.0


def _announce(infra: Any, stop: threading.Event) -> None:
    from service.jobs import worker_name

    name = worker_name()
    while True:
        try:
            found = infra.store.get("worker", name)
            doc = {"seen_at": time.time(), "pid": os.getpid()}
            if found is None:
                infra.store.create("worker", name, doc, ttl_s=PRESENCE_TTL_S)
            else:
                infra.store.replace("worker", name, doc, found[1], ttl_s=PRESENCE_TTL_S)
        except Exception:
            logging.getLogger("heatpath.worker").warning("could not record presence", exc_info=True)
        if stop.wait(PRESENCE_INTERVAL_S):
            return


def run_worker(threads: int = 1, periodic: bool = True) -> int:
    """Consume jobs until SIGTERM/SIGINT (graceful: the running job is finished first)."""
    from service import create_app
    from service.jobs import reap_stalled

    logging.config.dictConfig(logging_config(json_format=os.environ.get("HEATPATH_LOG_FORMAT", "json") == "json"))
    log = logging.getLogger("heatpath.worker")
    app = create_app()
    infra = app.extensions["heatpath"]
    if infra.settings["HEATPATH_QUEUE"] in ("memory", "immediate"):
        log.error("a job worker needs a shared queue (SQLite file or Redis), not %r", infra.settings["HEATPATH_QUEUE"])
        return 2
    reap_stalled(infra)
    infra.purge()
    stop = threading.Event()
    threading.Thread(target=_announce, args=(infra, stop), daemon=True, name="presence").start()
    log.info("job worker started", extra={"queue": infra.settings["HEATPATH_QUEUE"], "threads": threads})
    consumer = infra.queue.create_consumer(workers=threads, worker_type="thread", periodic=periodic,
                                           initial_delay=0.1, backoff=1.15, max_delay=1.0,
                                           check_worker_health=True, health_check_interval=1,
                                           graceful_signal="TERM")
    try:
        consumer.run()
    finally:
        stop.set()
    return 0


class WorkerSupervisor:
    """Start ``count`` job worker processes and keep them running until :meth:`stop`."""

    def __init__(self, count: int, log: Any, poll_s: float = 0.5) -> None:
        self.count, self.log, self.poll_s = count, log, poll_s
        self.procs: list[subprocess.Popen | None] = [None] * count
        self.stopping = threading.Event()
        self.thread: threading.Thread | None = None

    def _spawn(self, index: int) -> None:
        command = [sys.executable, "-m", "service.worker"] + ([] if index == 0 else ["--no-periodic"])
        self.procs[index] = subprocess.Popen(command, env=os.environ.copy())
        self.log.info("started job worker %d (pid %d)", index, self.procs[index].pid)

    def start(self) -> None:
        for i in range(self.count):
            self._spawn(i)
        self.thread = threading.Thread(target=self._watch, name="job-worker-supervisor", daemon=True)
        self.thread.start()

    def _watch(self) -> None:
        while not self.stopping.wait(self.poll_s):
            for i, proc in enumerate(self.procs):
                if proc is not None and proc.poll() is not None and not self.stopping.is_set():
                    self.log.warning("job worker %d (pid %d) exited (%s); starting it again", i, proc.pid,
                                     proc.returncode)
                    self._spawn(i)

    def stop(self, timeout: float) -> None:
        """SIGTERM every worker (they finish their current job), SIGKILL those still running after ``timeout``."""
        self.stopping.set()
        if self.thread is not None:
            self.thread.join()
        live = [p for p in self.procs if p is not None and p.poll() is None]
        for proc in live:
            proc.send_signal(signal.SIGTERM)
        deadline = time.monotonic() + timeout
        for proc in live:
            try:
                proc.wait(max(0.1, deadline - time.monotonic()))
            except subprocess.TimeoutExpired:
                self.log.warning("job worker pid %d did not stop in %.0f s; killing it", proc.pid, timeout)
                proc.kill()
                proc.wait()


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="heatpath worker", description="Run background jobs from the queue.")
    parser.add_argument("--threads", type=int, default=1, help="jobs run at once by this process (default 1)")
    parser.add_argument("--no-periodic", action="store_true", help="leave the once-a-minute housekeeping to others")
    args = parser.parse_args(argv)
    return run_worker(args.threads, periodic=not args.no_periodic)


if __name__ == "__main__":
    sys.exit(main())
