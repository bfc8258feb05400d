"""Robustness of the default dataset: random states across the stated domain (prints counts; no assertions).

Random pressure (0-25 GPa), temperature (1000-3000 K) and compositions drawn around three
invented demo bulks of the Kestrel IV scenario (peridotite-, basalt- and anorthosite-like,
each oxide scaled by a factor in 0.7-1.3). Every state must converge or be refused with a
clear reason; the counts of each outcome and the wall time are printed.

Usage: python benchmarks/robustness.py [--states 2000] [--seed 2026]
"""

from __future__ import annotations

import argparse
import collections
import time

import numpy as np

from thermo.equilibrium import prepare, solve_point
from thermo.errors import ConvergenceError, InputError

BULKS = {  # invented demo compositions (wt %), not natural samples
    "peridotite_like": {"SiO2": 45.0, "Al2O3": 4.4, "FeO": 8.1, "MgO": 38.0, "CaO": 3.5, "Na2O": 0.4},
    "basalt_like": {"SiO2": 50.0, "Al2O3": 15.0, "FeO": 10.0, "MgO": 8.0, "CaO": 12.0, "Na2O": 3.0},
    "anorthosite_like": {"SiO2": 46.0, "Al2O3": 30.0, "FeO": 2.0, "MgO": 2.0, "CaO": 17.0, "Na2O": 3.0},
}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--states", type=int, default=2000)
    ap.add_argument("--seed", type=int, default=2026)
    args = ap.parse_args()
    rng = np.random.default_rng(args.seed)
    outcomes: collections.Counter = collections.Counter()
    reasons: collections.Counter = collections.Counter()
    times = []
    names = list(BULKS)
    for i in range(args.states):
        oxides = {k: v * rng.uniform(0.7, 1.3) for k, v in BULKS[names[i % 3]].items()}
        p, t = rng.uniform(0.0, 25.0), rng.uniform(1000.0, 3000.0)
        start = time.perf_counter()
        try:
            eq, _ = solve_point(prepare(oxides), p, t)
            outcomes["converged (verified minimum)" if eq.diagnostics.get("polished") else
                     "converged (column generation only)"] += 1
        except ConvergenceError as exc:
            outcomes["did not converge"] += 1
            reasons[str(exc)[:60]] += 1
        except InputError as exc:
            outcomes["refused"] += 1
            reasons[f"{exc.field}: {exc.message[:60]}"] += 1
        times.append(time.perf_counter() - start)
    print(f"{args.states} random states, 0-25 GPa, 1000-3000 K, three invented bulks +-30 %")
    for key, n in outcomes.most_common():
        print(f"  {key:40s} {n:6d}")
    for key, n in reasons.most_common(10):
        print(f"    {n:5d}  {key}")
    print(f"  wall time per state: median {np.median(times) * 1e3:.0f} ms, max {max(times):.1f} s")


if __name__ == "__main__":
    main()
