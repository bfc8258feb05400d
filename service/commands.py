"""The computing commands of ``heatpath``: ``point``, ``cool``, ``isentrope``, ``table``.

Each command builds a request body (from ``--request FILE.json``, then the options given, which
win), sends it through :class:`service.client.HeatpathClient` to the server at ``--url`` /
``$HEATPATH_URL``, or, with neither, to the heatpath app in this process (same code, same
answers, no server needed), and prints the result: an aligned table for people by default,
``--json`` or ``--csv`` for programs, ``--netcdf FILE`` for tables, ``--plot FILE`` (``.svg``
or ``.png``) for a figure. Long work shows a progress line on stderr (when stderr is a
terminal, or with ``--progress``); a background job's progress is read from the job.

Exit status: 0 done; 1 the server refused the request or could not be reached (the reason
is printed on stderr, with each offending field); 2 a usage error.
"""

from __future__ import annotations

import argparse
import csv
import io
import json
import os
import sys
import textwrap
import threading
import time
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any, TextIO

from service.client import HeatpathClient, HeatpathClientError

OXIDE_EXAMPLE = "SiO2=45.5,Al2O3=4.5,FeO=8.5,MgO=37.5,CaO=3.5,Na2O=0.5"


# --------------------------------------------------------------------------- option parsing
def oxide_amounts(text: str) -> dict[str, float]:
    """``"SiO2=50,Al2O3=15"`` → ``{"SiO2": 50.0, "Al2O3": 15.0}`` (argparse type)."""
    out: dict[str, float] = {}
    for item in filter(None, (part.strip() for part in text.split(","))):
        name, sep, value = item.partition("=")
        if not sep or not name.strip():
            raise argparse.ArgumentTypeError(f"{item!r} is not OXIDE=AMOUNT (e.g. {OXIDE_EXAMPLE})")
        try:
            out[name.strip()] = float(value)
        except ValueError:
            raise argparse.ArgumentTypeError(f"amount of {name.strip()} is not a number: {value!r}") from None
    if not out:
        raise argparse.ArgumentTypeError(f"no oxides given (e.g. {OXIDE_EXAMPLE})")
    return out


def value_list(text: str) -> Any:
    """``"0,1,2.5"`` → ``[0.0, 1.0, 2.5]``; ``"0:10:11"`` → ``{"start": 0, "stop": 10, "count": 11}``."""
    try:
        if ":" in text:
            start, stop, count = text.split(":")
            return {"start": float(start), "stop": float(stop), "count": int(count)}
        return [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is neither a list (1,2,3) nor START:STOP:COUNT") from None


def name_list(text: str) -> list[str]:
    return [v.strip() for v in text.split(",") if v.strip()]


def load_request(path: str | None) -> dict[str, Any]:
    """The JSON object in ``path`` (``-``: standard input), or an empty dict."""
    if path is None:
        return {}
    try:
        text = sys.stdin.read() if path == "-" else Path(path).read_text(encoding="utf-8")
        body = json.loads(text)
    except (OSError, ValueError) as exc:
        raise SystemExit(f"heatpath: cannot read the request {path}: {exc}") from None
    if not isinstance(body, dict):
        raise SystemExit(f"heatpath: the request {path} must hold a JSON object")
    return body


def request_body(args: argparse.Namespace, fields: dict[str, Any]) -> dict[str, Any]:
    """The request file's object with the composition and ``fields`` given on the command line set over it."""
    body = load_request(args.request)
    if args.oxides is not None:
        comp = {"basis": args.basis or "wt_percent", "oxides": args.oxides}
        body["composition"] = comp
    elif args.basis is not None:
        body.setdefault("composition", {})["basis"] = args.basis
    if args.drop_unsupported:
        body.setdefault("composition", {})["drop_unsupported_oxides"] = True
    if args.dataset is not None:
        body["dataset"] = args.dataset
    if args.job:
        body["async"] = True
    body.update({k: v for k, v in fields.items() if v is not None})
    return body


# --------------------------------------------------------------------------- progress on stderr
class ProgressLine:
    """A one-line progress display on a stream: a bar for jobs, elapsed seconds for a plain request."""

    WIDTH = 28

    def __init__(self, stream: TextIO, enabled: bool) -> None:
        self.stream, self.enabled = stream, enabled
        self.started = time.monotonic()
        self.drawn = False
        self.stop = threading.Event()
        self.ticker: threading.Thread | None = None
        self.last_job: dict[str, Any] | None = None

    def job(self, job: dict[str, Any]) -> None:
        """Client progress callback: draw the job's state and progress."""
        self.last_job = job
        if not self.enabled:
            return
        self.stop.set()
        p = job.get("progress") or {}
        fraction = float(p.get("fraction") or 0.0)
        filled = round(fraction * self.WIDTH)
        bar = "#" * filled + "." * (self.WIDTH - filled)
        left = p.get("remaining_estimate_s")
        eta = f", about {left:.0f} s left" if isinstance(left, int | float) and job["state"] == "running" else ""
        points = f"{p.get('points_done', 0)}/{p.get('points_total', '?')} points"
        self._draw(f"job {job['state']:<9} [{bar}] {fraction:4.0%}  {points}{eta}")

    def _draw(self, text: str) -> None:
        self.stream.write("\r" + text.ljust(78)[:110])
        self.stream.flush()
        self.drawn = True

    def _tick(self) -> None:
        spinner = "|/-\\"
        i = 0
        while not self.stop.wait(0.25):
            elapsed = time.monotonic() - self.started
            if elapsed >= 0.75:
                self._draw(f"computing {spinner[i % 4]}  {elapsed:5.1f} s")
                i += 1

    def __enter__(self) -> ProgressLine:
        if self.enabled:
            self.ticker = threading.Thread(target=self._tick, name="heatpath-progress", daemon=True)
            self.ticker.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self.stop.set()
        if self.ticker is not None:
            self.ticker.join()
        if self.drawn:
            self.stream.write(f"\rdone in {time.monotonic() - self.started:.1f} s".ljust(78) + "\n")
            self.stream.flush()


# --------------------------------------------------------------------------- output helpers
def fmt_number(value: Any, digits: int = 5) -> str:
    if value is None:
        return "-"
    if isinstance(value, bool) or not isinstance(value, int | float):
        return str(value)
    if value == 0:
        return "0"
    mag = abs(value)
    return f"{value:.{digits}g}" if 1e-3 <= mag < 1e7 else f"{value:.{max(digits - 2, 1)}e}"


def aligned(headers: Sequence[str], rows: Sequence[Sequence[Any]], numeric: Sequence[bool] | None = None) -> str:
    """A plain-text table: columns padded to their widest cell, numbers right-aligned."""
    cells = [[str(h) for h in headers]] + [[c if isinstance(c, str) else fmt_number(c) for c in r] for r in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]
    numeric = numeric or [i > 0 for i in range(len(headers))]
    lines = []
    for k, row in enumerate(cells):
        parts = [c.rjust(w) if numeric[i] and k > 0 else c.ljust(w) for i, (c, w) in enumerate(zip(row, widths,
                                                                                                   strict=True))]
        lines.append("  ".join(parts).rstrip())
        if k == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


def csv_text(headers: Sequence[str], rows: Sequence[Sequence[Any]], comments: Sequence[str] = ()) -> str:
    out = io.StringIO()
    for line in comments:
        out.write(f"# {line}\n")
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(headers)
    for row in rows:
        writer.writerow(["" if v is None else (repr(v) if isinstance(v, float) else v) for v in row])
    return out.getvalue()


def provenance_lines(result: dict[str, Any]) -> list[str]:
    prov = result.get("provenance") or {}
    lines = []
    if prov:
        lines.append(f"dataset {prov.get('dataset_id')} (sha256 {str(prov.get('dataset_checksum'))[:16]}…), "
                     f"heatpath {prov.get('code_version')}, request {str(prov.get('request_hash'))[:16]}…")
    lines += [f"warning: {w}" for w in prov.get("warnings") or []]
    lines.append("Model estimates within the dataset's validity domain; not measurements.")
    return lines


def phase_summary(phases: Sequence[dict[str, Any]]) -> str:
    ordered = sorted(phases, key=lambda p: -float(p.get("mass_fraction") or 0.0))
    return ", ".join(f"{p['name']} {100 * float(p.get('mass_fraction') or 0):.1f}%" for p in ordered)


# --------------------------------------------------------------------------- per-command output
def show_point(result: dict[str, Any], args: argparse.Namespace, out: TextIO) -> None:
    headers = ["phase", "mass %", "volume %", "density kg/m3", "composition (wt %)"]
    rows = [[p["name"], 100 * p["mass_fraction"], 100 * p["volume_fraction"], p["density_kg_per_m3"],
             " ".join(f"{ox} {v:.1f}" for ox, v in p["composition_wt_percent"].items() if v >= 0.05)]
            for p in result["phases"]]
    if args.csv:
        oxides = sorted({ox for p in result["phases"] for ox in p["composition_wt_percent"]})
        fields = ["name", "is_liquid", "mass_fraction", "volume_fraction", "density_kg_per_m3"]
        out.write(csv_text(fields + [f"wt_percent_{ox}" for ox in oxides],
                           [[p[f] for f in fields] + [p["composition_wt_percent"].get(ox, 0.0) for ox in oxides]
                            for p in result["phases"]], provenance_lines(result)))
        return
    out.write(f"Equilibrium at {result['pressure_gpa']:g} GPa and {result['temperature_k']:g} K\n\n")
    out.write(aligned(headers, rows, [False, True, True, True, False]) + "\n\n")
    system = [("melt fraction", result["melt_fraction"], "kg/kg"),
              ("specific enthalpy", result["specific_enthalpy_j_per_kg"], "J/kg"),
              ("specific entropy", result["specific_entropy_j_per_kg_k"], "J/(kg K)"),
              ("heat capacity (frozen)", result["heat_capacity_frozen_j_per_kg_k"], "J/(kg K)"),
              ("density", result["density_kg_per_m3"], "kg/m3")]
    out.write(aligned(["system", "value", "unit"], [list(r) for r in system], [False, True, False]) + "\n\n")
    out.write("\n".join(provenance_lines(result)) + "\n")


#: (field, heading, scale) of the human-readable cooling-path table; energies per kg shown in kJ/kg.
STEP_COLUMNS = (
    ("temperature_k", "T K", 1.0), ("melt_fraction", "melt", 1.0), ("specific_enthalpy_j_per_kg", "h kJ/kg", 1e-3),
    ("heat_capacity_effective_j_per_kg_k", "cp_eff J/(kg K)", 1.0),
    ("heat_capacity_frozen_j_per_kg_k", "cp_frozen", 1.0), ("latent_heat_j_per_kg", "latent kJ/kg", 1e-3),
    ("cumulative_latent_heat_j_per_kg", "latent total", 1e-3), ("density_kg_per_m3", "rho kg/m3", 1.0),
)
CSV_STEP_FIELDS = (
    "temperature_k", "melt_fraction", "specific_enthalpy_j_per_kg", "specific_entropy_j_per_kg_k",
    "heat_capacity_frozen_j_per_kg_k", "heat_capacity_effective_j_per_kg_k", "latent_heat_j_per_kg",
    "cumulative_latent_heat_j_per_kg", "entropy_change_j_per_kg_k", "density_kg_per_m3",
)


def show_path(result: dict[str, Any], args: argparse.Namespace, out: TextIO) -> None:
    steps = result.get("steps") or []
    if args.csv:
        names = sorted({p["name"] for s in steps for p in s.get("phases") or []})
        fields = [f for f in CSV_STEP_FIELDS if any(f in s for s in steps)]
        rows = [[s.get(f) for f in fields] + [next((p["mass_fraction"] for p in s.get("phases") or []
                                                     if p["name"] == n), 0.0) for n in names] for s in steps]
        out.write(csv_text(fields + [f"mass_fraction_{n}" for n in names], rows, provenance_lines(result)))
        return
    mode = result.get("mode") or args.mode or "equilibrium"
    pressure = result.get("pressure_gpa", args.pressure)
    out.write(f"Isobaric cooling, {mode} crystallization"
              + (f", at {pressure:g} GPa" if isinstance(pressure, int | float) else "") + "\n\n")
    cols = [(k, h, f) for k, h, f in STEP_COLUMNS if any(k in s for s in steps)]
    rows = [[fmt_number(s[k] * f, 7) if isinstance(s.get(k), int | float) else "-" for k, _, f in cols]
            + [phase_summary(s.get("phases") or [])] for s in steps]
    out.write(aligned([h for _, h, _ in cols] + ["phases (mass %)"], rows, [True] * len(cols) + [False]) + "\n\n")
    events = result.get("saturation_sequence") or []
    if events:
        out.write(aligned(["saturation sequence", "event", "T K"],
                          [[e["phase"], e["event"], e["temperature_k"]] for e in events], [False, False, True]))
        out.write("\n\n")
    for key, label in (("liquidus_k", "liquidus"), ("solidus_k", "solidus")):
        value = result.get(key)
        out.write(f"{label}: {fmt_number(value, 7) + ' K' if value is not None else 'not reached'}\n")
    if result.get("cumulates"):
        out.write(f"cumulate layers: {len(result['cumulates'])} (see --json)\n")
    out.write("\n" + "\n".join(provenance_lines(result)) + "\n")


def show_columns(result: dict[str, Any], args: argparse.Namespace, out: TextIO, title: str) -> None:
    """Any result with parallel lists (or a list of row objects under ``points``/``steps``) as a table."""
    rows_key = next((k for k in ("points", "steps", "rows") if isinstance(result.get(k), list)), None)
    if rows_key:
        rows_in = result[rows_key]
        fields = [k for k, v in (rows_in[0].items() if rows_in else []) if not isinstance(v, dict | list)]
        rows = [[r.get(f) for f in fields] for r in rows_in]
    else:
        n = max((len(v) for v in result.values() if isinstance(v, list)), default=0)
        fields = [k for k, v in result.items() if isinstance(v, list) and len(v) == n and n
                  and all(x is None or isinstance(x, int | float) for x in v)]
        rows = [[result[f][i] for f in fields] for i in range(n)]
    if args.csv:
        out.write(csv_text(fields, rows, provenance_lines(result)))
        return
    scalars = [(k, v) for k, v in result.items() if isinstance(v, int | float | str) and not isinstance(v, bool)]
    out.write(title + "\n\n")
    if scalars:
        out.write(aligned(["quantity", "value"], [[k, v] for k, v in scalars], [False, True]) + "\n\n")
    out.write(aligned(fields, rows, [True] * len(fields)) + "\n\n")
    out.write("\n".join(provenance_lines(result)) + "\n")


def show_table(result: Any, args: argparse.Namespace, out: TextIO) -> None:
    """A table result: a summary for people (the grid itself goes to --json, --csv or --netcdf)."""
    pressures = result.get("pressure_gpa") or []
    temps = result.get("temperature_k") or []
    out.write(f"Property table: {len(pressures)} pressures x {len(temps)} temperatures"
              + (f" ({min(temps):g}-{max(temps):g} K)" if temps else "") + "\n\n")
    sol = (result.get("solidus") or {}).get("temperature_k") or [None] * len(pressures)
    liq = (result.get("liquidus") or {}).get("temperature_k") or [None] * len(pressures)
    out.write(aligned(["P GPa", "solidus K", "liquidus K"],
                      [[p, s, lq] for p, s, lq in zip(pressures, sol, liq, strict=False)]) + "\n\n")
    checks = result.get("checks") or {}
    if checks:
        rows = [[name, "passed" if c.get("passed") else "FAILED"] for name, c in checks.items() if isinstance(c, dict)]
        out.write(aligned(["check", "result"], rows, [False, False]) + "\n\n")
    out.write("The grid itself: --json, --csv or --netcdf FILE.\n")
    out.write("\n".join(provenance_lines(result)) + "\n")


# --------------------------------------------------------------------------- running a command
def open_client(args: argparse.Namespace) -> HeatpathClient:
    url = args.url or os.environ.get("HEATPATH_URL") or None
    key = args.key or os.environ.get("HEATPATH_KEY") or None
    timeout = (5.0, max(args.timeout, 5.0))
    if url is None:
        return HeatpathClient.in_process(timeout=timeout, job_timeout=args.timeout)
    return HeatpathClient(url, key, timeout=timeout, job_timeout=args.timeout)


def fail(command: str, exc: HeatpathClientError) -> int:
    print(f"heatpath {command}: {exc}", file=sys.stderr)
    return 1


def run_command(args: argparse.Namespace, call: Callable[[HeatpathClient, Any], tuple[Any, Any]],
                show: Callable[[Any, argparse.Namespace, TextIO], None], plot_kind: str | None) -> int:
    """Open the client, make the call with a progress display, write the outputs asked for.

    ``call(client, progress)`` returns ``(result, figure_data)``: what to print, and the JSON
    result the figure is drawn from (None when no figure is wanted).
    """
    if args.plot and plot_kind is None:
        raise SystemExit(f"heatpath {args.command}: --plot is not available for this command")
    if args.plot and Path(args.plot).suffix.lower() not in (".svg", ".png"):
        raise SystemExit(f"heatpath {args.command}: --plot needs a file name ending in .svg or .png")
    show_progress = args.progress if args.progress is not None else sys.stderr.isatty()
    progress = ProgressLine(sys.stderr, show_progress)
    try:
        with open_client(args) as hp, progress:
            result, figure_data = call(hp, progress.job)
    except HeatpathClientError as exc:
        return fail(args.command, exc)
    except KeyboardInterrupt:
        job = progress.last_job
        where = f"; job {job['id']} goes on at the server ({job['links']['self']})" if job else ""
        print(f"\nheatpath {args.command}: interrupted{where}", file=sys.stderr)
        return 130
    if args.plot:
        from service.plots import render

        Path(args.plot).write_bytes(render(figure_data, plot_kind, Path(args.plot).suffix.lower().lstrip(".")))
        print(f"wrote the figure to {args.plot}", file=sys.stderr)
    if args.json:
        sys.stdout.write(json.dumps(result, indent=2, allow_nan=False) + "\n")
    else:
        show(result, args, sys.stdout)
    return 0


def posting(path: str, body: dict[str, Any]) -> Callable[[HeatpathClient, Any], tuple[Any, Any]]:
    def call(hp: HeatpathClient, progress: Any) -> tuple[Any, Any]:
        result = hp.post(path, body, progress=progress)
        return result, result

    return call


def point(args: argparse.Namespace) -> int:
    body = request_body(args, {"pressure_gpa": args.pressure, "temperature_k": args.temperature,
                               "phases": args.phases})
    return run_command(args, posting("/v1/equilibrium", body), show_point, None)


def cool(args: argparse.Namespace) -> int:
    mode = "fractional" if args.fractional else args.mode
    body = request_body(args, {"pressure_gpa": args.pressure, "start_k": args.start_k, "stop_k": args.stop_k,
                               "step_k": args.step_k, "mode": mode, "trapped_melt_fraction": args.trapped_melt})
    return run_command(args, posting("/v1/cooling-paths", body), show_path, "cooling_path")


def isentrope(args: argparse.Namespace) -> int:
    body = request_body(args, {"pressure_gpa": args.pressures, "potential_temperature_k": args.potential_temperature,
                               "specific_entropy_j_per_kg_k": args.entropy})
    return run_command(args, posting("/v1/isentropes", body),
                       lambda r, a, o: show_columns(r, a, o, "Isentrope"), "isentrope")


def table(args: argparse.Namespace) -> int:
    body = request_body(args, {"pressure_gpa": args.pressures, "temperature_k": args.temperatures,
                               "form": args.form})
    if args.netcdf and (args.json or args.csv):
        raise SystemExit("heatpath table: --netcdf writes a file; give it without --json or --csv")
    accept = "application/x-netcdf" if args.netcdf else "text/csv" if args.csv else "application/json"

    def call(hp: HeatpathClient, progress: Any) -> tuple[Any, Any]:
        data = hp.post("/v1/tables", body, accept=accept, progress=progress)
        if accept == "application/json":
            return data, data
        if args.netcdf:
            Path(args.netcdf).write_bytes(data)
            print(f"wrote {len(data)} bytes of netCDF to {args.netcdf}", file=sys.stderr)
        # the figure is drawn from the JSON form (a second request; the server's cache answers it)
        return data, hp.post("/v1/tables", body, progress=progress) if args.plot else None

    def show(result: Any, a: argparse.Namespace, out: TextIO) -> None:
        if a.csv:
            out.write(result)
        elif not a.netcdf:
            show_table(result, a, out)

    return run_command(args, call, show, "table")


# --------------------------------------------------------------------------- the parsers
def add_common_options(parser: argparse.ArgumentParser) -> None:
    """Options every computing command takes (after its own)."""
    what = parser.add_argument_group("composition and dataset")
    what.add_argument("--oxides", type=oxide_amounts, metavar="OXIDE=AMOUNT,...",
                      help=f"bulk composition, e.g. {OXIDE_EXAMPLE} (normalised to 100)")
    what.add_argument("--basis", choices=("wt_percent", "mol_percent"),
                      help="basis of the oxide amounts (default wt_percent)")
    what.add_argument("--drop-unsupported", action="store_true",
                      help="drop oxides the dataset cannot represent instead of refusing them")
    what.add_argument("--dataset", metavar="ID", help="dataset id (default: the server's default; see 'datasets')")
    what.add_argument("--request", metavar="FILE.json",
                      help="start from the request body in this JSON file ('-' reads standard input); "
                           "options given on the command line replace its fields")
    out = parser.add_argument_group("output")
    fmt = out.add_mutually_exclusive_group()
    fmt.add_argument("--json", action="store_true", help="print the result as JSON")
    fmt.add_argument("--csv", action="store_true", help="print the result as CSV with '#' header lines")
    out.add_argument("--plot", metavar="FILE", help="also write a figure (.svg or .png) where the command has one")
    progress = out.add_mutually_exclusive_group()
    progress.add_argument("--progress", dest="progress", action="store_true", default=None,
                          help="show progress on stderr (default: when stderr is a terminal)")
    progress.add_argument("--quiet", dest="progress", action="store_false", help="no progress display")
    where = parser.add_argument_group("where to compute")
    where.add_argument("--url", metavar="URL",
                       help="heatpath server, e.g. http://127.0.0.1:8000 (default: $HEATPATH_URL; "
                            "without either the calculation runs in this process)")
    where.add_argument("--key", metavar="KEY", help="API key of a shared server (default: $HEATPATH_KEY)")
    where.add_argument("--timeout", type=float, default=3600.0, metavar="SECONDS",
                       help="longest wait for the answer, background jobs included (default 3600)")
    where.add_argument("--job", action="store_true",
                       help="run as a background job on the server and follow it (large work does so anyway)")


EPILOG_COMMON = ("Without --url (or $HEATPATH_URL) the calculation runs in this process; with it, on that server. "
                 "Results are model estimates within the dataset's stated validity domain.")


def add_compute_commands(sub: argparse._SubParsersAction) -> None:
    """``heatpath point | cool | isentrope | table``."""
    def parser(name: str, help_: str, description: str, example: str) -> argparse.ArgumentParser:
        return sub.add_parser(name, help=help_, description=textwrap.fill(description, 79),
                              epilog=f"example:\n  {example}\n\n" + textwrap.fill(EPILOG_COMMON, 79),
                              formatter_class=argparse.RawDescriptionHelpFormatter)

    p = parser("point", "stable phases of a composition at one pressure and temperature",
               "Stable phases, their proportions and compositions, and the system's properties at one "
               "pressure and temperature (Gibbs energy minimization).",
               f"heatpath point --oxides {OXIDE_EXAMPLE} --pressure 4 --temperature 2000")
    own = p.add_argument_group("the state")
    own.add_argument("--pressure", type=float, metavar="GPA", help="pressure [GPa]")
    own.add_argument("--temperature", type=float, metavar="K", help="temperature [K]")
    own.add_argument("--phases", type=name_list, metavar="NAME,...",
                   help="candidate phases (default: all of the dataset's)")
    add_common_options(p)
    p.set_defaults(func=point)

    c = parser("cool", "cool a melt at fixed pressure: phases, latent heat, saturation sequence",
               "Cool a melt at fixed pressure from --from to --to in steps of --step: phase proportions, "
               "enthalpy, effective and frozen heat capacity, latent heat per step and in total, density, "
               "the order in which minerals appear (temperatures root-found, not rounded to the steps), "
               "liquidus and solidus.",
               f"heatpath cool --oxides {OXIDE_EXAMPLE} --pressure 1 --from 2100 --to 1450 --step 10 "
               "--plot cooling.svg")
    own = c.add_argument_group("the path")
    own.add_argument("--pressure", type=float, metavar="GPA", help="pressure [GPa]")
    own.add_argument("--from", dest="start_k", type=float, metavar="K", help="start temperature [K]")
    own.add_argument("--to", dest="stop_k", type=float, metavar="K", help="stop temperature [K], below the start")
    own.add_argument("--step", dest="step_k", type=float, metavar="K", help="temperature step [K]")
    own.add_argument("--mode", choices=("equilibrium", "fractional"),
                   help="equilibrium (closed system, the default) or fractional (crystals removed each step)")
    own.add_argument("--fractional", action="store_true", help="short for --mode fractional")
    own.add_argument("--trapped-melt", type=float, metavar="FRACTION",
                   help="fractional mode: melt mass fraction kept in each cumulate layer (0 <= f < 1)")
    add_common_options(c)
    c.set_defaults(func=cool)

    i = parser("isentrope", "temperature and melt fraction along an isentrope",
               "Temperature, melt fraction, enthalpy and density against pressure at constant specific "
               "entropy, from a potential temperature (at 1 bar) or an entropy.",
               f"heatpath isentrope --oxides {OXIDE_EXAMPLE} --pressures 0:10:21 --potential-temperature 1900")
    own = i.add_argument_group("the isentrope")
    own.add_argument("--pressures", type=value_list, metavar="LIST|START:STOP:COUNT", help="pressures [GPa]")
    target = own.add_mutually_exclusive_group()
    target.add_argument("--potential-temperature", type=float, metavar="K", help="potential temperature [K]")
    target.add_argument("--entropy", type=float, metavar="J/(kg K)", help="specific entropy [J/(kg K)]")
    add_common_options(i)
    i.set_defaults(func=isentrope)

    t = parser("table", "property tables over pressure and temperature for convection codes",
               "Enthalpy, entropy, density, intrinsic and effective heat capacity and expansivity, melt "
               "fraction and its derivative over a pressure-temperature grid, with solidus and liquidus, in "
               "the T-, h- or s-indexed form; checked before it is served (see the checks in the output).",
               f"heatpath table --oxides {OXIDE_EXAMPLE} --pressures 0:4:5 --temperatures 1400:2400:51 "
               "--netcdf kestrel.nc")
    own = t.add_argument_group("the grid")
    own.add_argument("--pressures", type=value_list, metavar="LIST|START:STOP:COUNT", help="pressures [GPa]")
    own.add_argument("--temperatures", type=value_list, metavar="LIST|START:STOP:COUNT", help="temperatures [K]")
    own.add_argument("--form", choices=("temperature", "enthalpy", "entropy"),
                   help="index of the table: temperature (default), enthalpy T(P, h) or entropy T(P, s)")
    own.add_argument("--netcdf", metavar="FILE", help="write the table as netCDF (CF conventions) to FILE")
    add_common_options(t)
    t.set_defaults(func=table)
