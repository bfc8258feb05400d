"""``POST /v1/isentropes``: temperature, melt fraction, enthalpy and density along an isentrope.

The body is read with :class:`service.schemas.IsentropeRequest`; the calculation is one call
of :func:`thermo.isentropes.isentrope` (at each pressure the temperature of the given specific
entropy is root-found, Brent 1973; inside an isobaric invariant the lever rule), and the
result is dumped by :func:`service.serializers.isentrope_json`. Served through
:func:`service.jobs.run_or_enqueue` (size = number of pressures) and
:func:`service.jobs.negotiate` (JSON, or the figure of :func:`service.plots.isentrope_figure`).
"""

from __future__ import annotations

from typing import Any

from flask import Blueprint, Response, current_app

from service.equilibrium import common_parameters, prepare_problem, problem_warnings
from service.jobs import negotiate, offered, run_or_enqueue
from service.negotiation import produces
from service.plots import register_figures
from service.provenance import build_provenance
from service.schemas import IsentropeRequest, axis_length, axis_values, load_json
from service.serializers import MODEL_ESTIMATE_NOTE, bulk_composition_json, isentrope_json
from thermo.dataset import load_dataset
from thermo.isentropes import isentrope
from thermo.validity import melt_model_warnings

blueprint = Blueprint("isentropes", __name__)

OPERATION = "v1/isentropes"
register_figures(OPERATION, "isentrope")


def request_parameters(req: dict[str, Any]) -> dict[str, Any]:
    """The parsed request as hashed into ``provenance.request_hash``."""
    return {**common_parameters(OPERATION, req), "pressure_gpa": req["pressure_gpa"],
            "potential_temperature_k": req["potential_temperature_k"],
            "specific_entropy_j_per_kg_k": req["specific_entropy_j_per_kg_k"]}


@blueprint.post("/isentropes")
@produces(*offered(OPERATION))
def isentropes() -> Response:
    """T(P) at constant specific entropy, from a potential temperature or an entropy."""
    req = load_json(IsentropeRequest(max_points=current_app.config["HEATPATH_MAX_ISENTROPE_POINTS"]))
    response = run_or_enqueue(OPERATION, req, compute_isentrope, size=axis_length(req["pressure_gpa"]),
                              dataset=load_dataset(req["dataset"]))
    return negotiate(OPERATION, response)


def compute_isentrope(req: dict[str, Any], progress: Any = None) -> dict[str, Any]:
    """The isentrope for a loaded :class:`IsentropeRequest` (also run by job workers)."""
    problem = prepare_problem(req)
    iso = isentrope(problem, axis_values(req["pressure_gpa"]), potential_temperature_k=req["potential_temperature_k"],
                    specific_entropy_j_per_kg_k=req["specific_entropy_j_per_kg_k"], progress=progress)
    provenance = build_provenance(problem.dataset, request_parameters(req), problem_warnings(problem, req["phases"])
                                  + melt_model_warnings(problem.dataset, axis_values(req["pressure_gpa"])))
    return {
        **isentrope_json(iso),
        "composition": bulk_composition_json(problem.bulk),
        "provenance": {**provenance, "note": MODEL_ESTIMATE_NOTE},
    }
