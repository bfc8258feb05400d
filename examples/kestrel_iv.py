"""A tour of the heatpath Python client, set in an invented scenario.

Kestrel IV is a fictional rocky planet with a global magma ocean; Wren is its moon. Their bulk
compositions below are invented (peridotite-like for Kestrel IV, anorthositic-like for Wren)
and stand for no real body or sample. The numbers heatpath returns are model estimates.

Start a server first (``./run-service``), then::

    .venv/bin/python examples/kestrel_iv.py [--url http://127.0.0.1:8000] [--figure kestrel-iv-cooling.svg]

Without a server, ``--in-process`` runs the same calls inside this process.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from service.client import HeatpathClient, HeatpathClientError, composition

HERE = Path(__file__).resolve().parent
#: Invented bulk compositions [wt %].
KESTREL_IV = composition({"SiO2": 45.5, "Al2O3": 4.5, "FeO": 8.5, "MgO": 37.5, "CaO": 3.5, "Na2O": 0.5})
#: Wren's is the anorthositic bulk of the dataset page's crystallization table; a silica-poorer one (45 SiO2,
#: 28 Al2O3) is nepheline-normative and precipitates spurious nepheline above its liquidus (docs/dataset.md).
WREN = composition({"SiO2": 48.0, "Al2O3": 27.0, "FeO": 4.0, "MgO": 4.0, "CaO": 15.5, "Na2O": 1.5})


def show_point(hp: HeatpathClient) -> None:
    point = hp.equilibrium(KESTREL_IV, pressure_gpa=4.0, temperature_k=2000.0)
    print(f"Kestrel IV magma ocean at 4 GPa, 2000 K: melt fraction {point['melt_fraction']:.3f}")
    for phase in point["phases"]:
        print(f"  {phase['name']:16} {100 * phase['mass_fraction']:6.2f} wt%  {phase['density_kg_per_m3']:7.1f} kg/m3")
    print(f"  dataset {point['provenance']['dataset_id']}, request {point['provenance']['request_hash'][:12]}")


def show_cooling(hp: HeatpathClient, figure: Path | None) -> None:
    body = json.loads((HERE / "kestrel-iv-cooling.json").read_text())
    try:
        path = hp.post("/v1/cooling-paths", body, progress=lambda job: print(
            f"  job {job['state']}: {100 * job['progress']['fraction']:.0f}%", file=sys.stderr))
    except HeatpathClientError as exc:
        if exc.status == 404:
            print("this server has no cooling-path endpoint yet; skipping the cooling path")
            return
        raise
    print(f"\nCooling at {body['pressure_gpa']} GPa: liquidus {path['liquidus_k']}, solidus {path['solidus_k']}")
    for event in path["saturation_sequence"]:
        print(f"  {event['temperature_k']:8.1f} K  {event['phase']} {event['event']}")
    total = path["steps"][-1]["cumulative_latent_heat_j_per_kg"]
    print(f"  latent heat released down to {path['steps'][-1]['temperature_k']:.0f} K: {total / 1e3:.0f} kJ/kg")
    if figure is not None:
        from service.plots import render

        figure.write_bytes(render(path, "cooling_path", figure.suffix.lstrip(".") or "svg"))
        print(f"  figure written to {figure}")


def main() -> int:
    parser = argparse.ArgumentParser(description="A tour of the heatpath client (invented Kestrel IV scenario).")
    parser.add_argument("--url", default="http://127.0.0.1:8000", help="heatpath server")
    parser.add_argument("--in-process", action="store_true", help="compute in this process instead of a server")
    parser.add_argument("--figure", type=Path, help="write the cooling-path figure here (.svg or .png)")
    args = parser.parse_args()
    client = HeatpathClient.in_process() if args.in_process else HeatpathClient(args.url)
    try:
        with client as hp:
            print(f"heatpath {hp.health()['version']}; datasets: {', '.join(d['id'] for d in hp.datasets())}")
            show_point(hp)
            show_cooling(hp, args.figure)
    except HeatpathClientError as exc:
        print(f"heatpath: {exc}", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
