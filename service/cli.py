"""Command line of heatpath: ``heatpath serve``, ``datasets``, ``point``, ``cool``, ``isentrope``, ``table``,
``keys``, ``worker``.

``serve`` starts gunicorn with :mod:`service.gunicorn_conf`; ``datasets``
lists the datasets (shipped ones without a server, or a server's with
``--url``); the computing commands live in :mod:`service.commands`.
"""

from __future__ import annotations

import argparse
import json
import os
import shlex
import sys
from collections.abc import Sequence
from pathlib import Path

from service.commands import add_compute_commands
from service.provenance import code_version

GUNICORN_CONF = Path(__file__).resolve().with_name("gunicorn_conf.py")
APP_SPEC = "service:create_app()"
#: One BLAS/OpenMP thread per worker process: gunicorn already runs one worker per core.
SINGLE_THREAD_ENV = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def serve_command() -> list[str]:
    """The gunicorn command line ``heatpath serve`` runs."""
    return [sys.executable, "-m", "gunicorn", "--config", str(GUNICORN_CONF), APP_SPEC]


def serve_environment(args: argparse.Namespace) -> dict[str, str]:
    """Environment settings ``heatpath serve`` adds for gunicorn and its workers."""
    env = {name: os.environ.get(name, "1") for name in SINGLE_THREAD_ENV}
    if args.bind:
        env["HEATPATH_BIND"] = args.bind
    if args.workers is not None:
        if args.workers < 1:
            raise SystemExit("heatpath serve: --workers must be at least 1")
        env["HEATPATH_WORKERS"] = str(args.workers)
    return env


def serve(args: argparse.Namespace) -> int:
    """Replace this process by gunicorn (so signals such as Ctrl-C reach it directly)."""
    extra = serve_environment(args)
    if args.dry_run:
        print(shlex.join([f"{k}={v}" for k, v in extra.items()] + serve_command()))
        return 0
    os.chdir(GUNICORN_CONF.parent.parent)
    os.execve(sys.executable, serve_command(), {**os.environ, **extra})
    return 1  # not reached: execve does not return


def list_datasets(args: argparse.Namespace) -> int:
    """Print the shipped datasets (a table, or JSON with ``--json``)."""
    from service.datasets import dataset_summary
    from thermo.dataset import available_datasets, load_dataset

    url = args.url or os.environ.get("HEATPATH_URL")
    if url:
        from service.client import HeatpathClient, HeatpathClientError

        try:
            with HeatpathClient(url, args.key) as hp:
                rows = hp.datasets()
        except HeatpathClientError as exc:
            print(f"heatpath datasets: {exc}", file=sys.stderr)
            return 1
    else:
        rows = [dataset_summary(load_dataset(i)) for i in available_datasets()]
    if args.json:
        print(json.dumps(rows, indent=2))
        return 0
    for row in rows:
        (p_lo, p_hi), (t_lo, t_hi) = row["validity"]["pressure_gpa"], row["validity"]["temperature_k"]
        print(f"{row['id']}\n  {row['title']}")
        print(f"  oxides:      {', '.join(row['oxides'])}")
        print(f"  endmembers:  {row['endmember_count']}")
        print(f"  valid for:   {p_lo:g}-{p_hi:g} GPa, {t_lo:g}-{t_hi:g} K")
        print(f"  checksum:    sha256:{row['checksum']}")
    return 0


def _key_store():
    from service.settings import resolve
    from service.store import open_store

    return open_store(resolve()["HEATPATH_STORE"])


def keys_create(args: argparse.Namespace) -> int:
    """Create an API key and print it once (only a salted hash is stored)."""
    from service.auth import create_key

    try:
        key_id, key = create_key(_key_store(), args.owner, args.requests_per_minute, args.compute_seconds_per_day)
    except ValueError as exc:
        raise SystemExit(f"heatpath keys create: {exc}") from None
    if args.json:
        print(json.dumps({"id": key_id, "owner": args.owner.strip(), "key": key}))
    else:
        print(f"created key {key_id} for {args.owner.strip()}\n\n    {key}\n\n"
              "Give it to its owner now: it is not stored and cannot be shown again.")
    return 0


def keys_list(args: argparse.Namespace) -> int:
    """List keys (id, owner, limits, state); never the keys themselves."""
    import time

    from service.auth import list_keys

    rows = list_keys(_key_store())
    if args.json:
        print(json.dumps(rows, indent=2))
        return 0
    for row in rows:
        revoked = row["revoked_at"]
        state = "revoked " + time.strftime("%Y-%m-%d", time.gmtime(revoked)) if revoked else "active"
        rpm, cps = row["requests_per_minute"] or "default", row["compute_seconds_per_day"] or "default"
        limits = f"{rpm} req/min, {cps} s/day"
        print(f"{row['id']}  {state:18}  {limits:32}  {row['owner']}")
    return 0


def keys_revoke(args: argparse.Namespace) -> int:
    """Revoke a key by its id; it is refused from the next request on."""
    from service.auth import revoke_key

    if not revoke_key(_key_store(), args.key_id):
        print(f"heatpath keys revoke: no active key {args.key_id!r}", file=sys.stderr)
        return 1
    print(f"revoked key {args.key_id}")
    return 0


def run_job_worker(args: argparse.Namespace) -> int:
    """Run background jobs from the configured queue."""
    from service.worker import run_worker

    return run_worker(args.threads, periodic=not args.no_periodic)


def add_team_commands(sub: argparse._SubParsersAction) -> None:
    """``heatpath keys create|list|revoke`` and ``heatpath worker``."""
    keys = sub.add_parser("keys", help="manage API keys (in the store named by $HEATPATH_STORE)",
                          description="Create, list and revoke API keys. Only salted hashes are stored; "
                                      "a new key is printed once. The store is $HEATPATH_STORE "
                                      "(default var/heatpath.sqlite3).")
    ksub = keys.add_subparsers(dest="keys_command", required=True, metavar="ACTION")
    create = ksub.add_parser("create", help="create a key for an owner and print it once")
    create.add_argument("--owner", required=True, help='who holds the key, e.g. "A. Person, Some Institute"')
    create.add_argument("--requests-per-minute", type=int, metavar="N",
                        help="request allowance (default: service-wide)")
    create.add_argument("--compute-seconds-per-day", type=float, metavar="S",
                        help="solver time allowance per UTC day (default: service-wide)")
    create.add_argument("--json", action="store_true", help="print JSON")
    create.set_defaults(func=keys_create)
    lst = ksub.add_parser("list", help="list keys with owner, limits and state")
    lst.add_argument("--json", action="store_true", help="print JSON")
    lst.set_defaults(func=keys_list)
    revoke = ksub.add_parser("revoke", help="revoke a key by its id")
    revoke.add_argument("key_id", help="the key's id (second part of hpk_<id>_...)")
    revoke.set_defaults(func=keys_revoke)
    worker = sub.add_parser("worker", help="run background jobs (for job workers on other machines)",
                            description="Run background jobs from the queue named by $HEATPATH_QUEUE / "
                                        "$HEATPATH_STORE. 'heatpath serve' starts $HEATPATH_JOB_WORKERS of these.")
    worker.add_argument("--threads", type=int, default=1, metavar="N", help="jobs run at once (default 1)")
    worker.add_argument("--no-periodic", action="store_true", help="leave the once-a-minute housekeeping to others")
    worker.set_defaults(func=run_job_worker)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``heatpath`` command."""
    parser = argparse.ArgumentParser(
        prog="heatpath",
        description="Thermodynamics of crystallizing silicate melts, served over HTTP. "
                    "Results are model estimates within each dataset's stated validity domain.",
        epilog="'heatpath COMMAND --help' tells more. The computing commands (point, cool, isentrope, table) "
               "ask the server at --url or $HEATPATH_URL, or compute in this process when neither is given.",
    )
    parser.add_argument("--version", action="version", version=f"heatpath {code_version()}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    srv = sub.add_parser("serve", help="run the HTTP service with gunicorn",
                         description="Run the HTTP service with gunicorn (settings: service/gunicorn_conf.py).")
    srv.add_argument("--bind", metavar="HOST:PORT",
                     help="address to listen on (default: $HEATPATH_BIND or 127.0.0.1:8000)")
    srv.add_argument("--workers", type=int, metavar="N",
                     help="worker processes (default: $HEATPATH_WORKERS or one per CPU core)")
    srv.add_argument("--dry-run", action="store_true", help="print the gunicorn command instead of running it")
    srv.set_defaults(func=serve)
    dsl = sub.add_parser(
        "datasets", help="list the shipped datasets",
        description="List the shipped datasets: components, endmember count, validity domain, checksum.",
    )
    dsl.add_argument("--json", action="store_true", help="print JSON instead of a table")
    dsl.add_argument("--url", metavar="URL", help="list a server's datasets instead (default: $HEATPATH_URL)")
    dsl.add_argument("--key", metavar="KEY", help="API key for --url (default: $HEATPATH_KEY)")
    dsl.set_defaults(func=list_datasets)
    add_compute_commands(sub)
    add_team_commands(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``heatpath`` command."""
    args = build_parser().parse_args(argv)
    return args.func(args)


if __name__ == "__main__":
    sys.exit(main())
