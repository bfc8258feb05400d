"""Benchmark: standard-state properties of every endmember on a P-T grid.

Run as ``.venv/bin/python benchmarks/bench_endmembers.py``. Prints figures only
(no pass/fail): the time to evaluate ``standard_state`` for all endmembers of
the default dataset on a 100 x 100 grid (0-25 GPa, 500-3000 K), best of 5; the
time per endmember-point; the speed-up over a loop of scalar calls; and the
share of the time taken by each kind of endmember.
"""

from __future__ import annotations

import time

import numpy as np

from thermo.dataset import load_dataset
from thermo.endmembers import standard_state

N_P = N_T = 100
REPEATS = 5
N_SCALAR = 200


def best_time_s(fn, repeats: int = REPEATS) -> float:
    """Shortest wall time [s] of ``repeats`` calls."""
    best = np.inf
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def main() -> None:
    params = load_dataset().endmembers
    n_em = len(params.names)
    pressure = np.linspace(0.0, 25.0e9, N_P)[:, None]
    temperature = np.linspace(500.0, 3000.0, N_T)[None, :]
    n_points = N_P * N_T

    standard_state(params, pressure, temperature)  # warm-up
    grid_s = best_time_s(lambda: standard_state(params, pressure, temperature))
    print(f"grid: {N_P} x {N_T} P-T points x {n_em} endmembers, best of {REPEATS}")
    print(f"  total            {1e3 * grid_s:10.1f} ms")
    print(f"  per endmember-pt {1e9 * grid_s / (n_points * n_em):10.1f} ns")

    rng = np.random.default_rng(0)
    sample = list(zip(rng.uniform(0.0, 25.0e9, N_SCALAR), rng.uniform(500.0, 3000.0, N_SCALAR), strict=True))

    def scalar_loop() -> None:
        for p, t in sample:
            standard_state(params, p, t)

    scalar_s = best_time_s(scalar_loop, repeats=3)
    per_point_scalar = scalar_s / N_SCALAR
    per_point_grid = grid_s / n_points
    print(f"scalar loop over {N_SCALAR} points (all endmembers per call), best of 3")
    print(f"  per P-T point    {1e6 * per_point_scalar:10.1f} us  (grid: {1e6 * per_point_grid:.2f} us)")
    print(f"  grid speed-up    {per_point_scalar / per_point_grid:10.1f} x")

    groups = {
        "Bragg-Williams ordering": ~np.isnan(params.order[:, 0]),
        "Landau": ~np.isnan(params.landau[:, 0]),
        "liquids": params.is_liquid,
    }
    groups["other solids"] = ~np.any(np.stack(list(groups.values())), axis=0)
    print("by kind of endmember (same grid)")
    for label, mask in groups.items():
        sub = params.subset([n for n, m in zip(params.names, mask, strict=True) if m])
        sub_s = best_time_s(lambda sub=sub: standard_state(sub, pressure, temperature))
        per = 1e9 * sub_s / (n_points * len(sub.names))
        print(f"  {label:24s} {len(sub.names):3d} endmembers {1e3 * sub_s:9.1f} ms {per:9.1f} ns/endmember-pt")


if __name__ == "__main__":
    main()
