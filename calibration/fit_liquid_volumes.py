"""Fit the 1-bar volume, bulk modulus and K′ of liquid endmembers to melting curves.

Run from the project root::

    .venv/bin/python calibration/fit_liquid_volumes.py [--delta 4] [--scan] [liquid ...]

For each liquid of ``MODEL`` it minimises, with ``scipy.optimize.least_squares``,

    Σ ((Tm,model − Tm,obs)/σ)²  +  (ln(K/K_pm)/σ_K)²  +  ((K′ − K′_p)/σ_K′)²,

where Tm,model is the lowest temperature at which G(liquid) falls below the Gibbs energy of the most
stable crystalline alternative of the row (``calibration/melting_curves.csv``), computed with the
dataset's own ``standard_state`` and ``apply_liquid_volumes``. The second term is a Gaussian prior on
the 1-bar bulk modulus at the reference temperature, centred on the additive partial molar
compressibilities of Kress & Carmichael (1991) (``PARTIAL_MOLAR_K_GPA``, memory), with σ_K = 0.35
(a factor 1.4). The third is a prior on K′ shared by all liquids (``K_PRIME_PRIOR``): where the data
reach only a few GPa it sets K′, elsewhere the data do. All liquids share one Anderson–Grüneisen δ
(``--delta``, thermo.liquid_eos); ``--scan`` prints the summed χ² for several δ. The fit prints the
parameters with standard errors (from the Jacobian at the solution, priors included), the residuals
and the melting curve to 25 GPa; the values go into ``liquid_volumes.toml`` by hand, with their sources.
"""

from __future__ import annotations

import csv
import math
import sys
from pathlib import Path

import numpy as np
from scipy.optimize import brentq, least_squares

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))

from thermo.dataset import DATA_DIR, DEFAULT_DATASET_ID, apply_liquid_volumes, load_dataset, read_endmembers  # noqa: E402
from thermo.endmembers import standard_state  # noqa: E402

GPA = 1.0e9
ONE_BAR_PA = 1.0e5
CURVES_CSV = HERE / "melting_curves.csv"

#: 1-bar isothermal bulk moduli [GPa] from the partial molar volumes of Lange & Carmichael (1987, Geochim.
#: Cosmochim. Acta 51:2931) and the partial molar dV/dP of Kress & Carmichael (1991, Contrib. Mineral. Petrol.
#: 108:82) near 1673 K, both memory: dV/dP [1e-4 cm3/bar] SiO2 -1.89, Al2O3 -2.26, FeO -0.45, MgO +0.27,
#: Na2O -2.40; V [cm3/mol] SiO2 26.90, Al2O3 37.10, FeO 13.85, MgO 12.0, Na2O 29.0. K = -V/(dV/dP).
PARTIAL_MOLAR_K_GPA = {
    "forsterite_liquid": 50.90 / (1.89 - 2 * 0.27),  # 2 MgO + SiO2 -> 37.7 GPa
    #: CaO: Lange & Carmichael V 16.57 cm3/mol (memory); its dV/dP is not recalled and is taken as MgO's (+0.27)
    "diopside_liquid": 82.55 / (2 * 1.89 - 2 * 0.27),  # 25.5 GPa
    "fayalite_liquid": 54.60 / (2 * 0.45 + 1.89),  # 2 FeO + SiO2 -> 19.6 GPa
    "silica_liquid": 26.90 / 1.89,  # 14.2 GPa
    "enstatite_liquid": 77.80 / (2 * 1.89 - 2 * 0.27),  # 2 MgO + 2 SiO2 -> 24.0 GPa
    "albite_liquid": 113.75 / (0.5 * 2.40 + 0.5 * 2.26 + 3 * 1.89),  # 14.2 GPa
}
PRIOR_WIDTH_LN_K = 0.35
#: Prior on K′ of every liquid (mean, width): the range 4-8 of shock-wave and sink-float estimates for
#: silicate liquids (e.g. Rigden, Ahrens & Stolper 1989, J. Geophys. Res. 94:9508; Agee & Walker 1993,
#: Earth Planet. Sci. Lett. 114:315; memory).
K_PRIME_PRIOR = (6.0, 2.0)

#: Reference temperature (the 1-bar melting point) of each fitted liquid's values; V, K and K′ are free for all.
MODEL = {
    "forsterite_liquid": {"reference_temperature_k": 2163.0, "free": ("v", "k", "k_prime")},
    "diopside_liquid": {"reference_temperature_k": 1665.0, "free": ("v", "k", "k_prime")},
    "fayalite_liquid": {"reference_temperature_k": 1478.0, "free": ("v", "k", "k_prime")},
    "silica_liquid": {"reference_temperature_k": 1996.0, "free": ("v", "k", "k_prime")},
    "enstatite_liquid": {"reference_temperature_k": 1830.0, "free": ("v", "k", "k_prime")},
    "albite_liquid": {"reference_temperature_k": 1391.0, "free": ("v", "k", "k_prime")},
}
DELTA_SCAN = (2.0, 3.0, 4.0, 5.0, 6.0)


def read_curves(path: Path = CURVES_CSV) -> list[dict]:
    lines = [ln for ln in path.read_text(encoding="utf-8").splitlines() if ln and not ln.startswith("#")]
    rows = list(csv.DictReader(lines))
    for r in rows:
        r["pressure_gpa"], r["temperature_k"], r["uncertainty_k"] = (
            float(r["pressure_gpa"]), float(r["temperature_k"]), float(r["uncertainty_k"]))
    return rows


def parse_solids(text: str) -> list[dict[str, float]]:
    """'a|b+c|0.5*d' -> [{a: 1}, {b: 1, c: 1}, {d: 0.5}]."""
    out = []
    for alt in text.split("|"):
        combo = {}
        for term in alt.split("+"):
            factor, _, name = term.strip().rpartition("*")
            combo[name] = combo.get(name, 0.0) + (float(factor) if factor else 1.0)
        out.append(combo)
    return out


def gibbs_gap(params, liquid: str, solids: list[dict[str, float]], pressure_pa, temperature_k):
    """G(liquid) − min over the crystalline alternatives [J/mol]."""
    names = sorted({n for combo in solids for n in combo} | {liquid})
    g = standard_state(params.subset(names), pressure_pa, temperature_k).g_j_per_mol
    crystal = np.min([sum(c * g[..., names.index(n)] for n, c in combo.items()) for combo in solids], axis=0)
    return g[..., names.index(liquid)] - crystal


def melting_temperature_k(params, liquid: str, solids, pressure_pa: float, t_low=800.0, t_high=6000.0) -> float:
    """Lowest T where the liquid becomes more stable than the crystals (20 K scan, then brentq); NaN if none."""
    grid = np.arange(t_low, t_high + 1.0, 20.0)
    gap = gibbs_gap(params, liquid, solids, pressure_pa, grid)
    down = np.flatnonzero((gap[:-1] > 0.0) & (gap[1:] < 0.0))
    if not down.size:
        return float("nan")
    lo, hi = grid[down[0]], grid[down[0] + 1]
    return brentq(lambda t: float(gibbs_gap(params, liquid, solids, pressure_pa, t)), lo, hi, xtol=1e-6)


def initial_slope_k_per_gpa(params, liquid: str, solids) -> float:
    """dTm/dP at 1 bar [K/GPa]: the Clapeyron ratio ΔV/ΔS at the 1-bar melting point (first crystalline alternative)."""
    t_m = melting_temperature_k(params, liquid, solids[:1], ONE_BAR_PA)
    if not math.isfinite(t_m):
        return float("nan")
    names = sorted(set(solids[0]) | {liquid})
    st = standard_state(params.subset(names), ONE_BAR_PA, t_m)
    dv = st.v_m3_per_mol[names.index(liquid)] - sum(c * st.v_m3_per_mol[names.index(n)] for n, c in solids[0].items())
    ds = st.s_j_per_mol_k[names.index(liquid)] - sum(c * st.s_j_per_mol_k[names.index(n)] for n, c in solids[0].items())
    return float(dv / ds) * GPA


def row_value(params, row: dict, solids) -> float:
    """The model's value of a melting_curves.csv row: Tm [K] at its pressure, or the initial slope [K/GPa]."""
    if row["id"].endswith("-slope"):
        return initial_slope_k_per_gpa(params, row["liquid"], solids)
    return melting_temperature_k(params, row["liquid"], solids, row["pressure_gpa"] * GPA)


def recalled_parameters(delta: float):
    """The dataset's parameters with the recalled K′ of endmembers.csv (undoing any k_prime override) and δ."""
    ds = load_dataset()
    recalled, _, _ = read_endmembers(DATA_DIR / DEFAULT_DATASET_ID / "endmembers.csv", ds.oxides)
    table = {**ds.extra.get("liquid_volumes", {}), "anderson_gruneisen_delta": delta}
    return ds.endmembers, recalled.k0_prime, table


def with_entry(base, k_prime_recalled, table: dict, liquid: str, entry: dict):
    """Dataset parameters with the liquid's liquid_volumes.toml entry replaced."""
    from dataclasses import replace

    liquids = {k: dict(v) for k, v in table.get("liquids", {}).items()}
    liquids[liquid] = {**entry, "source": "fit in progress"}
    return apply_liquid_volumes(replace(base, k0_prime=k_prime_recalled.copy()), {**table, "liquids": liquids})


def one_bar(params, liquid: str, temperature_k: float) -> tuple[float, float]:
    st = standard_state(params.subset([liquid]), ONE_BAR_PA, temperature_k)
    return float(st.v_m3_per_mol[0] * 1e6), float(st.k_t_pa[0] / GPA)


def fit_liquid(liquid: str, rows: list[dict], free: tuple[str, ...], t_ref: float, delta: float):
    base, kp_recalled, table = recalled_parameters(delta)
    v_start, _ = one_bar(with_entry(base, kp_recalled, table, liquid, {"reference_temperature_k": t_ref}),
                               liquid, t_ref)
    kp_start = K_PRIME_PRIOR[0]
    k_pm = PARTIAL_MOLAR_K_GPA[liquid]
    data = [(r, parse_solids(r["solids"])) for r in rows]

    def entry_of(x):
        vals = dict(zip(free, np.exp(x), strict=True))
        e = {"reference_temperature_k": t_ref, "volume_cm3_per_mol": v_start * vals["v"],
             "bulk_modulus_gpa": k_pm * vals["k"]}
        if "k_prime" in free:
            e["k_prime"] = kp_start * vals["k_prime"]
        return e

    def residuals(x):
        e = entry_of(x)
        prm = with_entry(base, kp_recalled, table, liquid, e)
        r = [(row_value(prm, row, s) - row["temperature_k"]) / row["uncertainty_k"] for row, s in data]
        r.append(math.log(e["bulk_modulus_gpa"] / k_pm) / PRIOR_WIDTH_LN_K)
        if "k_prime" in e:
            r.append((e["k_prime"] - K_PRIME_PRIOR[0]) / K_PRIME_PRIOR[1])
        return np.nan_to_num(np.array(r), nan=30.0)

    sol = least_squares(residuals, np.zeros(len(free)), diff_step=1e-3, x_scale=0.1)
    cov = np.linalg.pinv(sol.jac.T @ sol.jac)
    se = np.sqrt(np.diag(cov))
    entry = entry_of(sol.x)
    prm = with_entry(base, kp_recalled, table, liquid, entry)
    return entry, se, cov, float(2 * sol.cost), prm


def report(liquid: str, rows: list[dict], free, t_ref: float, delta: float) -> None:
    entry, se, cov, chi2, prm = fit_liquid(liquid, rows, free, t_ref, delta)
    names = {"v": "volume_cm3_per_mol", "k": "bulk_modulus_gpa", "k_prime": "k_prime"}
    print(f"\n{liquid}: {len(rows)} rows, free {free}, chi2 (incl. prior) {chi2:.2f}")
    for k, name in enumerate(free):
        value = entry[names[name]]
        print(f"  {names[name]:22s} {value:9.3f} +/- {value * se[k]:.3f}")
    if len(free) > 1:
        corr = cov / np.sqrt(np.outer(np.diag(cov), np.diag(cov)))
        print("  correlations:", np.array2string(corr, precision=2))
    print(f"  partial molar K estimate {PARTIAL_MOLAR_K_GPA[liquid]:.1f} GPa")
    for r in rows:
        tm = row_value(prm, r, parse_solids(r["solids"]))
        print(f"  {r['id']:8s} {r['pressure_gpa']:5.1f} GPa obs {r['temperature_k']:6.0f} +/- {r['uncertainty_k']:3.0f}"
              f" calc {tm:6.0f} ({tm - r['temperature_k']:+5.0f})")
    solids = parse_solids(rows[0]["solids"])
    curve = [(p, melting_temperature_k(prm, liquid, solids, max(p, 1e-4) * GPA)) for p in (0, 2, 5, 10, 15, 20, 25)]
    print("  curve:", ", ".join(f"{p} GPa {t:.0f} K" for p, t in curve))
    print("  liquid_volumes.toml: " + ", ".join(f"{k} = {v:.4g}" for k, v in entry.items()))


def main(argv: list[str]) -> int:
    import argparse

    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--delta", type=float, default=None, help="Anderson-Grueneisen delta (default: the dataset's)")
    ap.add_argument("--scan", action="store_true", help="print the summed chi2 for several delta and stop")
    ap.add_argument("liquids", nargs="*", help="liquids to fit (default: all of MODEL)")
    args = ap.parse_args(argv)
    rows = read_curves()
    chosen = args.liquids or list(MODEL)
    data = {liq: [r for r in rows if r["liquid"] == liq and r["role"] == "fit"] for liq in chosen}
    if args.scan:
        for delta in DELTA_SCAN:
            chi2 = {liq: fit_liquid(liq, data[liq], MODEL[liq]["free"], MODEL[liq]["reference_temperature_k"],
                                    delta)[3] for liq in chosen}
            print(f"delta {delta:3.1f}: total chi2 {sum(chi2.values()):7.2f}  "
                  + "  ".join(f"{k.removesuffix('_liquid')} {v:.2f}" for k, v in chi2.items()), flush=True)
        return 0
    delta = args.delta if args.delta is not None else float(load_dataset().extra["liquid_volumes"].get(
        "anderson_gruneisen_delta", 4.0))
    print(f"Anderson-Grueneisen delta = {delta}")
    for liquid in chosen:
        report(liquid, data[liquid], MODEL[liquid]["free"], MODEL[liquid]["reference_temperature_k"], delta)
    return 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
