"""``POST /v1/equilibrium``: the stable assemblage of a bulk composition at one pressure and temperature.

The body is read with :class:`service.schemas.EquilibriumRequest`; the
calculation is one call of :func:`thermo.equilibrium.solve_point` (Gibbs energy
minimization: linear programming over candidate compositions with column
generation, White, Johnson & Dantzig 1958, J. Chem. Phys. 28:751; Dantzig &
Wolfe 1960, Oper. Res. 8:101; then a Newton polish), and the result is dumped
by :mod:`service.serializers`.
"""

from __future__ import annotations

from typing import Any

from flask import Blueprint

from service.datasets import WEAK_CONFIDENCE
from service.jobs import run_or_enqueue
from service.provenance import build_provenance
from service.schemas import EquilibriumRequest, load_json
from service.serializers import MODEL_ESTIMATE_NOTE, assemblage_json, bulk_composition_json
from thermo.assemblage import Assemblage
from thermo.dataset import load_dataset
from thermo.equilibrium import Problem, prepare, solve_point
from thermo.phases import default_phase_names
from thermo.validity import coexisting_liquids_warnings, melt_model_warnings

blueprint = Blueprint("equilibrium", __name__)

OPERATION = "v1/equilibrium"


def common_parameters(operation: str, req: dict[str, Any]) -> dict[str, Any]:
    """What every computing request hashes into ``provenance.request_hash``: operation, dataset, composition, phases.

    ``phases`` is the dataset's default list when the request names none (defaults filled in).
    """
    comp = req["composition"]
    phases = req["phases"] if req["phases"] is not None else default_phase_names(load_dataset(req["dataset"]))
    return {
        "operation": operation,
        "dataset_id": req["dataset"],
        "composition": {"basis": comp["basis"], "oxides": dict(comp["oxides"]),
                        "drop_unsupported_oxides": comp["drop_unsupported_oxides"]},
        "phases": list(phases),
    }


def request_parameters(req: dict[str, Any]) -> dict[str, Any]:
    """The parsed request as hashed into ``provenance.request_hash`` (defaults filled in)."""
    return {**common_parameters(OPERATION, req), "pressure_gpa": req["pressure_gpa"],
            "temperature_k": req["temperature_k"]}


def prepare_problem(req: dict[str, Any]) -> Problem:
    """The core's :class:`~thermo.equilibrium.Problem` for a loaded computing request (composition, dataset, phases)."""
    comp = req["composition"]
    return prepare(comp["oxides"], comp["basis"], req["dataset"], phases=req["phases"],
                   drop_unsupported=comp["drop_unsupported_oxides"])


def problem_warnings(problem: Problem, requested_phases: list[str] | None) -> list[str]:
    """Caveats of every result for a prepared problem: composition handling and left-out phases."""
    system = problem.system
    out = list(problem.bulk.warnings) + list(system.notes)
    if requested_phases is not None:
        entered = set(system.pure_names) | {s.name for s in system.solutions}
        left_out = [p for p in requested_phases if p not in entered]
        if left_out:
            out.append(f"candidate phases left out because they need oxides absent from the composition "
                       f"(or outside the dataset's components): {', '.join(left_out)}")
    return out


def result_warnings(problem: Problem, requested_phases: list[str] | None, assemblage: Assemblage) -> list[str]:
    """Caveats of one equilibrium result: those of :func:`problem_warnings`, chemical potentials, weak parameters."""
    ds, system = problem.dataset, problem.system
    out = problem_warnings(problem, requested_phases)
    if not system.full_rank:
        out.append(f"the candidate phases span {system.basis.shape[1]} of the {len(system.components)} oxide "
                   "components, so chemical potentials are fixed only in the combinations the phases can "
                   "form; the values given are the smallest-norm solution")
    weak = []
    for ph in assemblage.phases:
        for em, x in zip(ph.endmembers, ph.endmember_fractions, strict=True):
            if x > 0 and ds.info[em].confidence in WEAK_CONFIDENCE and em not in weak:
                weak.append(em)
    if weak:
        out.append(f"the assemblage contains endmembers whose parameters have low or medium-low confidence: "
                   f"{', '.join(weak)} (see /v1/datasets/{ds.id}/endmembers)")
    return out


@blueprint.post("/equilibrium")
def equilibrium() -> Any:
    """Stable phases and their properties for one composition, pressure and temperature.

    Served through :func:`service.jobs.run_or_enqueue`: cached by request, dataset checksum and
    code version (``ETag``/``If-None-Match``), and run as a background job with ``"async": true``.
    """
    req = load_json(EquilibriumRequest())
    return run_or_enqueue(OPERATION, req, compute_equilibrium, size=1, dataset=load_dataset(req["dataset"]))


def compute_equilibrium(req: dict[str, Any], progress: Any = None) -> dict[str, Any]:
    """The equilibrium result for a loaded :class:`EquilibriumRequest` (also run by job workers)."""
    problem = prepare_problem(req)
    _, assemblage = solve_point(problem, req["pressure_gpa"], req["temperature_k"])
    provenance = build_provenance(problem.dataset, request_parameters(req),
                                  result_warnings(problem, req["phases"], assemblage)
                                  + melt_model_warnings(problem.dataset, req["pressure_gpa"])
                                  + coexisting_liquids_warnings(sum(ph.is_liquid for ph in assemblage.phases)))
    return {
        "pressure_gpa": req["pressure_gpa"],
        "temperature_k": req["temperature_k"],
        **assemblage_json(assemblage),
        "composition": bulk_composition_json(problem.bulk),
        "provenance": {**provenance, "note": MODEL_ESTIMATE_NOTE},
    }
