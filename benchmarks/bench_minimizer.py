"""Benchmark of the Gibbs energy minimizer (prints figures; no assertions).

* 200 fixed states in NCFMAS (three invented demo bulks of the Kestrel IV scenario, varied
  by ±30 %, 0-25 GPa, 1000-2800 K) with the liquid and every candidate phase: median and
  90th-percentile wall time cold, warm-started (from the answer 5 K hotter), and G
  evaluations per point.
* A naive reference solver written for this benchmark (scipy SLSQP over all phase amounts
  and compositions at once, from several starts) on a subset of the states, with the G each
  reaches and the speed ratio.

Usage: python benchmarks/bench_minimizer.py [--states 200] [--naive 12]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from scipy.optimize import minimize

from thermo import solutions as sol
from thermo.endmembers import standard_state
from thermo.equilibrium import prepare, solve_point

BULKS = {  # invented demo compositions (wt %), not natural samples
    "peridotite_like": {"SiO2": 45.0, "Al2O3": 4.4, "FeO": 8.1, "MgO": 38.0, "CaO": 3.5, "Na2O": 0.4},
    "basalt_like": {"SiO2": 50.0, "Al2O3": 15.0, "FeO": 10.0, "MgO": 8.0, "CaO": 12.0, "Na2O": 3.0},
    "anorthosite_like": {"SiO2": 46.0, "Al2O3": 30.0, "FeO": 2.0, "MgO": 2.0, "CaO": 17.0, "Na2O": 3.0},
}


def states(n: int, seed: int = 2026):
    rng = np.random.default_rng(seed)
    names = list(BULKS)
    return [({k: v * rng.uniform(0.7, 1.3) for k, v in BULKS[names[i % 3]].items()},
             rng.uniform(0.0001, 25.0), rng.uniform(1000.0, 2800.0)) for i in range(n)]


def naive_solve(problem, p_gpa, t, starts: int = 3, seed: int = 0):
    """SLSQP over all endmember amounts of every phase subject to mass balance; best of ``starts``."""
    s, b = problem.system, problem.bulk_mol
    g0 = standard_state(s.params, p_gpa * 1e9, t).g_j_per_mol
    blocks = [(k, k + 1, None) for k in range(s.n_pure)]
    off = s.n_pure
    for ph in s.solutions:
        blocks.append((off, off + ph.model.size, ph))
        off += ph.model.size
    a = np.vstack([s.pure_stoich, *[ph.stoich for ph in s.solutions]]).T
    g_all = np.concatenate([g0[: s.n_pure], *[g0[ph.endmember_index] for ph in s.solutions]])

    def total_g(n):
        total = 0.0
        for lo, hi, ph in blocks:
            seg = np.maximum(n[lo:hi], 1e-14)
            if ph is None:
                total += seg[0] * g_all[lo]
            else:
                total += seg.sum() * sol.molar_gibbs(ph.model, seg, g_all[lo:hi], t, p_gpa * 1e9)
        return total / 1e6

    rng = np.random.default_rng(seed)
    best = np.inf
    for _ in range(starts):
        x0 = rng.uniform(0.0, 1.0, off)
        x0 *= np.abs(b).sum() / np.abs(a @ x0).sum()
        res = minimize(total_g, x0, method="SLSQP", bounds=[(0, None)] * off,
                       constraints=[{"type": "eq", "fun": lambda n: a @ n - b}], options={"maxiter": 500})
        if res.success or np.abs(a @ res.x - b).max() < 1e-8:
            best = min(best, res.fun * 1e6)
    return best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--states", type=int, default=200)
    ap.add_argument("--naive", type=int, default=12, help="states also solved by the naive reference solver")
    args = ap.parse_args()
    cold, warm, cold_min, warm_min, evals, g_ours, problems = [], [], [], [], [], [], []
    solve_point(prepare(BULKS["basalt_like"]), 1.0, 1500.0)  # compiled kernels loaded before timing
    for oxides, p, t in states(args.states):
        problem = prepare(oxides)
        start = time.perf_counter()
        eq, _ = solve_point(problem, p, t)
        cold.append(time.perf_counter() - start)
        cold_min.append(eq.diagnostics["wall_time_s"])
        evals.append(eq.diagnostics["g_evaluations"])
        hot, _ = solve_point(problem, p, t + 5.0)
        start = time.perf_counter()
        again, _ = solve_point(problem, p, t, warm=hot)
        warm.append(time.perf_counter() - start)
        warm_min.append(again.diagnostics["wall_time_s"])
        g_ours.append(float(eq.mu @ eq.bulk_mol))
        problems.append((problem, p, t))
    ms = 1e3
    n_sol = len(problems[0][0].system.solutions) - 1
    print(f"states: {args.states} (NCFMAS, liquid + {n_sol} solutions + pure phases)")
    print("  minimizer alone (equilibrate), and the whole point with the assemblage's properties (solve_point):")
    for label, times, alone, target in (("cold", cold, cold_min, 30), ("warm", warm, warm_min, 5)):
        print(f"  {label}  median {np.median(alone) * ms:6.1f} ms alone, {np.median(times) * ms:6.1f} ms with "
              f"properties   p90 {np.percentile(alone, 90) * ms:6.1f} / {np.percentile(times, 90) * ms:6.1f} ms"
              f"   (target <= {target} ms)")
    print(f"  G evaluations per point (cold): median {np.median(evals):.0f}")
    naive_t, lower_or_equal, diffs = [], 0, []
    for k in range(min(args.naive, len(problems))):
        problem, p, t = problems[k]
        start = time.perf_counter()
        g_naive = naive_solve(problem, p, t)
        naive_t.append(time.perf_counter() - start)
        diffs.append(g_naive - g_ours[k])
        lower_or_equal += g_ours[k] <= g_naive + 1e-6
    if naive_t:
        ratio = np.median(naive_t) / np.median(cold_min[: len(naive_t)])
        print(f"naive SLSQP reference on {len(naive_t)} states: median {np.median(naive_t) * ms:.0f} ms per point")
        print(f"  speed ratio (naive / ours, cold): {ratio:.1f}x   (target >= 20x)")
        print(f"  ours reaches equal or lower G on {lower_or_equal}/{len(naive_t)} states; "
              f"median G(naive) - G(ours) = {np.median(diffs):.3g} J")


if __name__ == "__main__":
    main()
