"""``POST /v1/cooling-paths``: isobaric cooling of a melt by equilibrium or fractional crystallization.

The body is read with :class:`service.schemas.CoolingPathRequest`; the calculation is one
call of :func:`thermo.paths.cooling_path` (every phase boundary root-found and inserted as
rows just above and below it, exact step energetics; see that module), and the result is
dumped by :func:`service.serializers.cooling_path_json`. Served through
:func:`service.jobs.run_or_enqueue` (cached; a job above the size threshold, the size being
the number of temperature steps) and :func:`service.jobs.negotiate` (JSON, or the figure of
:func:`service.plots.cooling_path_figure` as SVG or PNG, also for a job's result).
"""

from __future__ import annotations

from typing import Any

from flask import Blueprint, Response, current_app

from service.equilibrium import common_parameters, prepare_problem, problem_warnings
from service.jobs import negotiate, offered, run_or_enqueue
from service.negotiation import produces
from service.plots import register_figures
from service.provenance import build_provenance
from service.schemas import CoolingPathRequest, load_json, path_step_count
from service.serializers import MODEL_ESTIMATE_NOTE, bulk_composition_json, cooling_path_json
from thermo.dataset import load_dataset
from thermo.paths import cooling_path
from thermo.validity import coexisting_liquids_warnings, melt_model_warnings

blueprint = Blueprint("cooling_paths", __name__)

OPERATION = "v1/cooling_paths"
register_figures(OPERATION, "cooling_path")


def request_parameters(req: dict[str, Any]) -> dict[str, Any]:
    """The parsed request as hashed into ``provenance.request_hash`` (defaults filled in)."""
    return {**common_parameters(OPERATION, req), "pressure_gpa": req["pressure_gpa"], "start_k": req["start_k"],
            "stop_k": req["stop_k"], "step_k": req["step_k"], "mode": req["mode"],
            "trapped_melt_fraction": trapped_melt_fraction(req)}


def trapped_melt_fraction(req: dict[str, Any]) -> float | None:
    """The trapped-melt fraction a request means: its value or 0 in fractional mode, None in equilibrium mode."""
    if req["mode"] != "fractional":
        return None
    return 0.0 if req["trapped_melt_fraction"] is None else req["trapped_melt_fraction"]


@blueprint.post("/cooling-paths")
@produces(*offered(OPERATION))
def cooling_paths() -> Response:
    """Cool a composition at fixed pressure from ``start_k`` to ``stop_k`` in steps of ``step_k``."""
    req = load_json(CoolingPathRequest(max_steps=current_app.config["HEATPATH_MAX_PATH_STEPS"]))
    size = int(path_step_count(req["start_k"], req["stop_k"], req["step_k"]))
    response = run_or_enqueue(OPERATION, req, compute_cooling_path, size=size, dataset=load_dataset(req["dataset"]))
    return negotiate(OPERATION, response)


def compute_cooling_path(req: dict[str, Any], progress: Any = None) -> dict[str, Any]:
    """The cooling-path result for a loaded :class:`CoolingPathRequest` (also run by job workers)."""
    problem = prepare_problem(req)
    path = cooling_path(problem, req["pressure_gpa"], req["start_k"], req["stop_k"], req["step_k"], req["mode"],
                        trapped_melt_fraction(req) or 0.0, progress=progress)
    liquids = [sum(ph.is_liquid for ph in point.phases) for point in path.points]
    provenance = build_provenance(problem.dataset, request_parameters(req), problem_warnings(problem, req["phases"])
                                  + melt_model_warnings(problem.dataset, req["pressure_gpa"])
                                  + coexisting_liquids_warnings(liquids, "at some rows of the path"))
    return {
        **cooling_path_json(path),
        "start_k": req["start_k"], "stop_k": req["stop_k"], "step_k": req["step_k"],
        "composition": bulk_composition_json(problem.bulk),
        "provenance": {**provenance, "note": MODEL_ESTIMATE_NOTE},
    }
