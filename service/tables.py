"""``POST /v1/tables``: property tables over pressure and temperature for convection codes.

The body is read with :class:`service.schemas.TableRequest`; the calculation is one call of
:func:`thermo.tables.property_table` (h, s, ρ, intrinsic and effective cp and α, melt
fraction and dφ/dT over the grid, solidus and liquidus per pressure, the enthalpy- and
entropy-indexed forms T(P, h) and T(P, s), and the table's own checks), dumped by
:func:`service.serializers.table_json`. Served through :func:`service.jobs.run_or_enqueue`
(size = grid nodes) and :func:`service.jobs.negotiate`: JSON (all three forms), CSV (one
form, ``form``; :func:`thermo.formats.table_to_csv`), netCDF-3 following the CF conventions
(:func:`thermo.formats.table_to_netcdf`), or the melt-fraction map as SVG or PNG. The other
formats are written from the JSON result, so a job's result is served in them as well, and
every format carries the same numbers.

Rows (one per pressure) run serially in an HTTP worker, so a synchronous request keeps to one
core; a background job spreads them over a process pool on every core of its host.
"""

from __future__ import annotations

import os
from typing import Any

import numpy as np
from flask import Blueprint, Response, current_app, has_request_context

from service.equilibrium import common_parameters, prepare_problem, problem_warnings
from service.jobs import negotiate, offered, register_renderer, run_or_enqueue
from service.negotiation import produces
from service.plots import register_figures
from service.provenance import build_provenance
from service.schemas import TableRequest, axis_length, axis_values, load_json
from service.serializers import MODEL_ESTIMATE_NOTE, bulk_composition_json, table_json
from thermo.dataset import load_dataset
from thermo.formats import table_to_csv, table_to_netcdf
from thermo.tables import FIELDS, PropertyTable, TableSettings, property_table
from thermo.validity import melt_model_warnings

blueprint = Blueprint("tables", __name__)

OPERATION = "v1/tables"
CSV_MEDIA_TYPE = "text/csv"
NETCDF_MEDIA_TYPE = "application/x-netcdf"


# --------------------------------------------------------------------------- other formats, from the JSON result
def _array(value: Any, dtype: type = float) -> np.ndarray:
    """A (nested, rectangular) JSON list as an array; for floats, null as NaN."""
    if dtype is not float:
        return np.asarray(value, dtype=dtype)
    cells = np.array(value, dtype=object)
    return np.where(np.equal(cells, None), np.nan, cells).astype(float)


def _no_boundary_points() -> dict[str, np.ndarray]:
    empty = {name: np.array([], float) for name in ("temperature_k", *FIELDS)}
    return {"pressure_index": np.array([], int), "side": np.array([], int), **empty}


def table_from_json(result: dict[str, Any]) -> PropertyTable:
    """The :class:`~thermo.tables.PropertyTable` a JSON table result holds (for the core's CSV and netCDF writers)."""
    points = result.get("boundary_points")
    if points is None:
        boundary = _no_boundary_points()
    else:
        boundary = {k: _array(v, int if k in ("pressure_index", "side") else float) for k, v in points.items()}
    return PropertyTable(
        pressure_gpa=_array(result["pressure_gpa"]), temperature_k=_array(result["temperature_k"]),
        by_temperature={k: _array(v) for k, v in result["by_temperature"].items()},
        solidus={k: _array(v) for k, v in result["solidus"].items()},
        liquidus={k: _array(v) for k, v in result["liquidus"].items()},
        enthalpy_axis_j_per_kg=_array(result["enthalpy_axis_j_per_kg"]),
        by_enthalpy={k: _array(v) for k, v in result["by_enthalpy"].items()},
        enthalpy_range_j_per_kg=_array(result["enthalpy_range_j_per_kg"]),
        entropy_axis_j_per_kg_k=_array(result["entropy_axis_j_per_kg_k"]),
        by_entropy={k: _array(v) for k, v in result["by_entropy"].items()},
        entropy_range_j_per_kg_k=_array(result["entropy_range_j_per_kg_k"]),
        boundary_points=boundary, checks=result["checks"], metadata=result["metadata"],
    )


def table_csv(result: dict[str, Any]) -> bytes:
    """CSV of the form the request named, with ``#`` header lines (units, index order, checks, provenance)."""
    return table_to_csv(table_from_json(result), result["form"], result["provenance"]).encode("utf-8")


def table_netcdf(result: dict[str, Any]) -> bytes:
    """netCDF-3 bytes of the whole table following the CF conventions."""
    return table_to_netcdf(table_from_json(result), result["provenance"])


register_renderer(OPERATION, CSV_MEDIA_TYPE, "csv", table_csv)
register_renderer(OPERATION, NETCDF_MEDIA_TYPE, "nc", table_netcdf)
register_figures(OPERATION, "table")


def request_parameters(req: dict[str, Any]) -> dict[str, Any]:
    """The parsed request as hashed into ``provenance.request_hash``."""
    return {**common_parameters(OPERATION, req), "pressure_gpa": req["pressure_gpa"],
            "temperature_k": req["temperature_k"], "form": req["form"], "variables": req["variables"],
            "boundary_points": req["boundary_points"], "indexed_count": req["indexed_count"]}


@blueprint.post("/tables")
@produces(*offered(OPERATION))
def tables() -> Response:
    """Properties over a pressure-temperature grid, as JSON, CSV, netCDF or a melt-fraction map."""
    req = load_json(TableRequest(max_points=current_app.config["HEATPATH_MAX_TABLE_POINTS"]))
    size = axis_length(req["pressure_gpa"]) * axis_length(req["temperature_k"])
    response = run_or_enqueue(OPERATION, req, compute_table, size=size, dataset=load_dataset(req["dataset"]))
    return negotiate(OPERATION, response)


#: Fewest pressure rows for which a job starts a process pool: each process first imports the core
#: (about 1-3 s measured), which pays off only over several rows.
MIN_ROWS_FOR_POOL = 4


def table_processes(n_pressures: int) -> int:
    """Processes for the rows: 1 while answering a request or for few rows, else one per core (at most one per row)."""
    if has_request_context() or n_pressures < MIN_ROWS_FOR_POOL:
        return 1
    return max(1, min(n_pressures, os.cpu_count() or 1))


def compute_table(req: dict[str, Any], progress: Any = None) -> dict[str, Any]:
    """The table for a loaded :class:`TableRequest` (also run by job workers)."""
    problem = prepare_problem(req)
    pressures, temps = axis_values(req["pressure_gpa"]), axis_values(req["temperature_k"])
    settings = TableSettings(workers=table_processes(len(pressures)))
    table = property_table(problem, pressures, temps[0], temps[-1], len(temps), n_enthalpy=req["indexed_count"],
                           n_entropy=req["indexed_count"], settings=settings, progress=progress)
    warnings = (problem_warnings(problem, req["phases"]) + failed_checks(table.checks)
                + melt_model_warnings(problem.dataset, pressures))
    provenance = build_provenance(problem.dataset, request_parameters(req), warnings)
    return {
        **table_json(table, req["variables"], req["boundary_points"]),
        "form": req["form"],
        "composition": bulk_composition_json(problem.bulk),
        "provenance": {**provenance, "note": MODEL_ESTIMATE_NOTE},
    }


def failed_checks(checks: dict[str, Any]) -> list[str]:
    """A warning per failed check of a table (the numbers are in ``checks``)."""
    return [f"table check {name} failed: {', '.join(f'{k} {v}' for k, v in c.items() if k != 'passed')}"
            for name, c in checks.items() if isinstance(c, dict) and not c.get("passed")]
