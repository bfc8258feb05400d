"""Make the figures shown in README.md (docs/kestrel-iv-cooling.svg, docs/kestrel-iv-melt-map.svg).

The scenario is invented: the magma ocean of the fictional planet Kestrel IV, with an
invented peridotite-like bulk composition (examples/kestrel-iv-cooling.json). The figures
are made by the same code that serves ``Accept: image/svg+xml`` (service/plots.py), from
results computed in this process by the HTTP API (an in-process client). Where this
version's app has no such endpoint yet, the numbers come straight from the numerical core
and are put in the API's response shape here.

    .venv/bin/python scripts/make_docs_figures.py [--table]
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

from service.client import HeatpathClient, HeatpathClientError  # noqa: E402
from service.plots import render  # noqa: E402


def core_cooling_path(body: dict) -> dict:
    """A cooling-path result in the API's shape, computed with thermo directly."""
    from service.provenance import build_provenance
    from thermo.equilibrium import prepare
    from thermo.paths import cooling_path

    comp = body["composition"]
    problem = prepare(comp["oxides"], comp["basis"])
    path = cooling_path(problem, body["pressure_gpa"], body["start_k"], body["stop_k"], body["step_k"],
                        body.get("mode", "equilibrium"), body.get("trapped_melt_fraction", 0.0))
    steps = [{
        "temperature_k": pt.temperature_k, "melt_fraction": pt.melt_fraction,
        "phases": [{"name": ph.name, "is_liquid": ph.is_liquid, "mass_fraction": ph.mass_fraction} for ph in pt.phases],
        "specific_enthalpy_j_per_kg": pt.specific_enthalpy_j_per_kg,
        "specific_entropy_j_per_kg_k": pt.specific_entropy_j_per_kg_k,
        "heat_capacity_frozen_j_per_kg_k": pt.cp_frozen_j_per_kg_k,
        "heat_capacity_effective_j_per_kg_k": pt.cp_effective_j_per_kg_k,
        "latent_heat_j_per_kg": pt.step_latent_heat_j_per_kg_initial,
        "cumulative_latent_heat_j_per_kg": pt.cumulative_latent_heat_j_per_kg_initial,
        "entropy_change_j_per_kg_k": pt.step_entropy_change_j_per_k_per_kg_initial,
        "density_kg_per_m3": pt.density_kg_per_m3,
    } for pt in path.points]
    events = [{"phase": e.phase, "temperature_k": e.temperature_k, "event": e.event}
              for e in path.saturation_sequence()]
    provenance = build_provenance(problem.dataset, {"operation": "docs/cooling_path", **body}, path.notes)
    return {"mode": path.mode, "pressure_gpa": path.pressure_gpa, "steps": steps, "saturation_sequence": events,
            "liquidus_k": path.liquidus_k, "solidus_k": path.solidus_k, "provenance": provenance}


def cooling_result(body: dict) -> dict:
    with HeatpathClient.in_process() as hp:
        try:
            return hp.post("/v1/cooling-paths", body)
        except HeatpathClientError as exc:
            if exc.status != 404:
                raise
    return core_cooling_path(body)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--request", default=str(REPO / "examples" / "kestrel-iv-cooling.json"))
    parser.add_argument("--out", default=str(REPO / "docs" / "kestrel-iv-cooling.svg"))
    args = parser.parse_args()
    body = json.loads(Path(args.request).read_text(encoding="utf-8"))
    started = time.perf_counter()
    result = cooling_result(body)
    Path(args.out).write_bytes(render(result, "cooling_path", Path(args.out).suffix.lstrip(".")))
    print(f"wrote {args.out} ({len(result['steps'])} steps, {time.perf_counter() - started:.1f} s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
