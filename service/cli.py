"""Command line of heatpath: ``heatpath serve`` and ``heatpath datasets``.

``serve`` starts gunicorn with :mod:`service.gunicorn_conf`; ``datasets``
lists the shipped datasets without a server.
"""

from __future__ import annotations

import argparse
import json
import os
import shlex
import sys
from collections.abc import Sequence
from pathlib import Path

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


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``heatpath`` command."""
    parser = argparse.ArgumentParser(
        prog="heatpath",
        description="Thermodynamics of crystallizing silicate melts, served over HTTP. "
                    "Results are model estimates within each dataset's stated validity domain.",
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
    dsl.set_defaults(func=list_datasets)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``heatpath`` command."""
    args = build_parser().parse_args(argv)
    return args.func(args)


if __name__ == "__main__":
    sys.exit(main())
