"""Benchmark of cooling paths and property tables (prints figures; no assertions).

Bulk composition: the magma ocean of Kestrel IV, a fictional planet of the heatpath demo
scenario; the peridotite-like composition is invented for the demo (wt %: SiO2 45.0,
Al2O3 4.4, FeO 8.1, MgO 38.0, CaO 3.5, Na2O 0.4), not a natural sample.

* Equilibrium cooling path at 4 GPa, 2150 → 1350 K in 5 K steps (target ≤ 0.8 s).
* Property table, 50 pressures × 200 temperatures (default 1–10 GPa, 1300–2500 K), on
  ``--workers`` processes (target ≤ 60 s on 2 cores), and the parallel speedup against one
  process (target ≥ 1.7×) measured on ``--speedup-rows`` pressure rows (all rows with
  ``--full-serial``).

Also printed: the number of minimizations and the mean time per minimization, so the
cost can be traced to the minimizer.

Usage: python benchmarks/bench_paths.py [--step 5] [--repeats 5] [--pressures 50] [--temperatures 200]
       [--workers 2] [--speedup-rows 4] [--full-serial] [--skip-table]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import thermo.energetics as energetics
import thermo.saturation as saturation
from thermo.equilibrium import prepare
from thermo.paths import cooling_path
from thermo.tables import TableSettings, property_table

KESTREL_IV_MAGMA_OCEAN = {"SiO2": 45.0, "Al2O3": 4.4, "FeO": 8.1, "MgO": 38.0, "CaO": 3.5, "Na2O": 0.4}


class SolveCounter:
    """Counts minimizations (and their wall time) made through thermo.energetics and thermo.saturation."""

    def __init__(self):
        self.calls, self.seconds = 0, 0.0
        self._originals = {m: m.equilibrate for m in (energetics, saturation)}

    def __enter__(self):
        for module, original in self._originals.items():
            module.equilibrate = self._wrap(original)
        return self

    def __exit__(self, *exc):
        for module, original in self._originals.items():
            module.equilibrate = original

    def _wrap(self, original):
        def timed(*args, **kwargs):
            t0 = time.perf_counter()
            try:
                return original(*args, **kwargs)
            finally:
                self.calls += 1
                self.seconds += time.perf_counter() - t0
        return timed


def warm_up() -> None:
    """Load the compiled kernels (what a server does once at start) on another bulk, so the timed path
    pays no one-time loading; the path's own caches stay cold."""
    from thermo.equilibrium import solve_point
    from thermo.kernels import warm_up as load_kernels

    t0 = time.perf_counter()
    load_kernels()
    other = prepare({"SiO2": 50.0, "Al2O3": 15.0, "FeO": 10.0, "MgO": 8.0, "CaO": 12.0, "Na2O": 3.0})
    cooling_path(other, 1.0, 1600.0, 1500.0, 50.0)
    solve_point(other, 1.0, 1500.0)
    print(f"one-time kernel loading and warm-up (another bulk): {time.perf_counter() - t0:.2f} s")


def bench_path(problem, step_k: float, repeats: int) -> None:
    """The path ``repeats`` times, each on a freshly prepared problem (no per-bulk caches carried over)."""
    walls = []
    for k in range(repeats):
        fresh = prepare(KESTREL_IV_MAGMA_OCEAN) if k else problem
        with SolveCounter() as count:
            t0 = time.perf_counter()
            path = cooling_path(fresh, 4.0, 2150.0, 1350.0, step_k)
            walls.append(time.perf_counter() - t0)
    wall = walls[0]
    rows = len(path.points)
    print(f"path 4 GPa 2150->1350 K, {step_k:g} K steps: median {np.median(walls):.2f} s, best {min(walls):.2f} s, "
          f"worst {max(walls):.2f} s of {repeats} (target <= 0.8 s), {rows} rows, {len(path.boundaries)} boundaries")
    print(f"  minimizations: {count.calls} ({count.calls / rows:.1f} per row), "
          f"mean {1e3 * count.seconds / count.calls:.1f} ms each, {100 * count.seconds / wall:.0f} % of the time")
    print(f"  liquidus {path.liquidus_k} K, solidus {path.solidus_k} K; notes: {'; '.join(path.notes) or '-'}")
    print(f"  dh = T ds identity residual {path.diagnostics['t_ds_identity_relative_residual']:.2e}")
    for b in path.boundaries:
        what = ", ".join([f"+{n}" for n in b.appearing] + [f"-{n}" for n in b.disappearing])
        print(f"  {b.temperature_k:10.4f} K  {what}")


def bench_table(problem, n_p: int, n_t: int, workers: int, speedup_rows: int, full_serial: bool) -> None:
    pressures = np.linspace(1.0, 10.0, n_p)
    t0 = time.perf_counter()
    table = property_table(problem, pressures, 1300.0, 2500.0, n_t, settings=TableSettings(workers=workers))
    wall = time.perf_counter() - t0
    nodes = n_p * n_t
    print(f"table {n_p} x {n_t} on {workers} processes: {wall:.1f} s (target <= 60 s on 2 cores), "
          f"{1e3 * wall * workers / nodes:.0f} ms per node and process")
    print(f"  checks all passed: {table.checks['all_passed']}; "
          f"cp integral residual {table.checks['cp_effective_integrates_to_enthalpy']['max_relative_residual']:.2e}")
    rows = pressures if full_serial else pressures[:: max(1, n_p // speedup_rows)][:speedup_rows]
    times = {}
    for w in (1, workers):
        t0 = time.perf_counter()
        property_table(problem, rows, 1300.0, 2500.0, n_t, settings=TableSettings(workers=w))
        times[w] = time.perf_counter() - t0
    print(f"  speedup on {len(rows)} rows: 1 process {times[1]:.1f} s, {workers} processes {times[workers]:.1f} s, "
          f"{times[1] / times[workers]:.2f}x (target >= 1.7x)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--step", type=float, default=5.0)
    ap.add_argument("--repeats", type=int, default=5, help="path repetitions (fresh problem each time)")
    ap.add_argument("--pressures", type=int, default=50)
    ap.add_argument("--temperatures", type=int, default=200)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--speedup-rows", type=int, default=4)
    ap.add_argument("--full-serial", action="store_true")
    ap.add_argument("--skip-table", action="store_true")
    args = ap.parse_args()
    problem = prepare(KESTREL_IV_MAGMA_OCEAN)
    print("bulk: Kestrel IV magma ocean (fictional planet; invented peridotite-like composition)")
    warm_up()
    bench_path(problem, args.step, args.repeats)
    if not args.skip_table:
        bench_table(problem, args.pressures, args.temperatures, args.workers, args.speedup_rows, args.full_serial)


if __name__ == "__main__":
    main()
