"""Derive the high-cristobalite endmember (``cristobalite``, SiO2) of the default dataset from NIST-JANAF.

Run from the project root::

    .venv/bin/python calibration/cristobalite_from_janaf.py

It prints the values that go into ``endmembers.csv`` (copied by hand, with this script named as their
source) and checks them against the tables. No value is recalled from the literature except the volume.

Why: the recalled dataset has no 1-bar high-temperature silica polymorph, so quartz stood in for
cristobalite and tridymite at 1 bar and the silica-saturated 1-bar liquidus came out 50-200 K low
(docs/dataset.md). NIST-JANAF (Chase 1998, J. Phys. Chem. Ref. Data Monograph 9; tables O-035 "Silicon
Oxide, Cristobalite, High" and O-037 "Silicon Oxide, Quartz", read offline with the ``janaf`` package)
gives both polymorphs on one scale; tridymite has no JANAF table and lies within a few hundred J/mol of
cristobalite (it is not added).

Method:

* Cp(T) = a + bT + c/T² + d/√T (the Holland & Powell 2011 form) fitted by linear least squares to the
  JANAF high-cristobalite Cp from 500 to 2500 K (below ~500 K the table extrapolates the high form);
* the Gibbs energy difference to the dataset's own quartz is taken from JANAF: at T_a = 1600 K,
  H = H_qz(dataset) + [H_cr − H_qz](JANAF) and S = S_qz(dataset) + [S_cr − S_qz](JANAF), and H0, S0 at
  298.15 K follow from the fitted Cp. The dataset then reproduces JANAF's quartz-cristobalite G
  difference near the temperatures where cristobalite matters (1 bar, 1100-2000 K), whatever the small
  differences between the dataset's quartz and JANAF's;
* volume: β-cristobalite, cubic, a ≈ 7.16 Å with Z = 8 near 500 °C (memory), 27.5 cm³/mol, taken with
  α0 = 0 (the high form expands little; memory). K0 = 30 GPa and K' = 4: not the ~11.5 GPa of the low
  form (memory), with which the soft phase becomes denser than coesite at high pressure and spuriously
  stable up to 25 GPa; with 30 GPa (between that and quartz's ~37 GPa, memory) the cristobalite field
  closes below 0.8 GPa at every temperature to 3500 K, as the silica phase diagram requires (the
  field is a few tenths of a GPa wide; memory). The volume terms only matter in that narrow field.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

import janaf  # noqa: E402
import polars as pl  # noqa: E402
from scipy.optimize import brentq  # noqa: E402

from thermo.dataset import load_dataset  # noqa: E402
from thermo.endmembers import cp_integrals, standard_state  # noqa: E402

ONE_BAR_PA = 1.0e5
T0 = 298.15
T_ANCHOR_K = 1600.0
CP_FIT_RANGE_K = (500.0, 2500.0)
V0_CM3, K0_GPA, K_PRIME = 27.5, 30.0, 4.0


def janaf_rows(table_id: str) -> pl.DataFrame:
    df = janaf.Table(table_id).df.filter(pl.col("Cp").is_not_null() & (pl.col("T(K)") >= T0 - 0.01))
    return df


def janaf_difference(t: float) -> tuple[float, float, float]:
    """[H, S, G] of high cristobalite minus quartz from JANAF at ``t`` [J/mol, J/(mol K), J/mol]."""
    c, q = janaf_rows("O-035"), janaf_rows("O-037")
    rc, rq = c.filter(pl.col("T(K)") == t), q.filter(pl.col("T(K)") == t)
    dh = (float(rc["delta-f H"][0]) - float(rq["delta-f H"][0])) * 1e3
    ds = float(rc["S"][0]) - float(rq["S"][0])
    dg = (float(rc["delta-f G"][0]) - float(rq["delta-f G"][0])) * 1e3
    return dh, ds, dg


def fit_cp() -> np.ndarray:
    c = janaf_rows("O-035").filter(pl.col("T(K)").is_between(*CP_FIT_RANGE_K))
    t = c["T(K)"].to_numpy()
    design = np.column_stack([np.ones_like(t), t, 1.0 / t**2, 1.0 / np.sqrt(t)])
    coef, *_ = np.linalg.lstsq(design, c["Cp"].to_numpy(), rcond=None)
    worst = np.max(np.abs(design @ coef - c["Cp"].to_numpy()))
    print(f"Cp fit {CP_FIT_RANGE_K[0]:.0f}-{CP_FIT_RANGE_K[1]:.0f} K: a {coef[0]:.4f}, b {coef[1]:.6e}, "
          f"c {coef[2]:.1f}, d {coef[3]:.3f}; worst misfit {worst:.3f} J/(mol K)")
    return coef


def main() -> int:
    coef = fit_cp()
    ds = load_dataset()
    qz = standard_state(ds.endmembers.subset(["quartz"]), ONE_BAR_PA, T_ANCHOR_K)
    dh, dsj, _ = janaf_difference(T_ANCHOR_K)
    h_a = float(qz.h_j_per_mol[0]) + dh
    s_a = float(qz.s_j_per_mol_k[0]) + dsj
    _, icp, icpt = (float(x) for x in cp_integrals(T_ANCHOR_K, *coef))
    h0, s0 = h_a - icp, s_a - icpt
    print(f"anchor {T_ANCHOR_K:.0f} K: JANAF cristobalite - quartz dH {dh:.1f} J/mol, dS {dsj:.3f} J/(mol K)")
    print(f"endmembers.csv: h0_j_per_mol {h0:.0f}, s0_j_per_mol_k {s0:.3f}, v0_m3_per_mol {V0_CM3 * 1e-6:.4e}, "
          f"cp {coef[0]:.4f}, {coef[1]:.6e}, {coef[2]:.1f}, {coef[3]:.3f}, alpha0 0, k0_gpa {K0_GPA}, "
          f"k0_prime {K_PRIME}, k0_dprime_per_gpa {-K_PRIME / K0_GPA:.4f}")

    if "cristobalite" in ds.endmembers.names:
        sub = ds.endmembers.subset(["quartz", "cristobalite", "silica_liquid"])

        def gap(t: float, i: int = 1, j: int = 0) -> float:
            g = standard_state(sub, ONE_BAR_PA, t).g_j_per_mol
            return float(g[i] - g[j])

        print("T [K]   dG(crst - qz) model / JANAF [J/mol]")
        for t in (1100.0, 1300.0, 1500.0, 1700.0, 1900.0, 2000.0):
            print(f"  {t:6.0f}  {gap(t):8.0f} / {janaf_difference(t)[2]:8.0f}")
        print(f"quartz -> cristobalite at 1 bar: model {brentq(gap, 700.0, 1600.0):.0f} K")
        print(f"cristobalite melting at 1 bar: model {brentq(lambda t: gap(t, 2, 1), 1500.0, 2600.0):.0f} K "
              "(Richet et al. 1982: 1999 K; checks.csv M22)")
        grid = ds.endmembers.subset(["quartz", "coesite", "stishovite", "cristobalite"])
        p, t = np.meshgrid(np.linspace(0.2e9, 25e9, 125), np.linspace(800.0, 3500.0, 55))
        g = standard_state(grid, p, t).g_j_per_mol
        stable = g[..., 3] < g[..., :3].min(axis=-1)
        print(f"highest pressure where cristobalite beats quartz, coesite and stishovite (800-3500 K): "
              f"{p[stable].max() / 1e9 if stable.any() else 0.0:.2f} GPa")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
