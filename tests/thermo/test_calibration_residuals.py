"""The calibrated liquid of the default dataset against melting experiments (calibration/experiments.csv).

Every number is computed with the minimizer on the dataset as shipped (liquid_calibration.toml
applied by the loader), with the liquid and the solids of each experiment as candidate phases:
the liquid model is what is tested. Spurious Ca-, Na- and Mg-rich phases of the full phase set
near the simple joins (the liquid species cannot represent CaSiO3-, nepheline- or MgO-normative
liquids) are documented in docs/dataset.md, not here.

Tolerances: 1-bar melting points ±20 K and eutectic temperatures ±20 K (the calibration's
acceptance limits, about twice the experiments' stated ±5-10 K, allowing for the spread between
determinations quoted in checks.csv); eutectic liquids ±5 wt%; melting curves ±50 K (the
recalled high-pressure data carry ±30-60 K); Fe-Mg exchange KD ±0.05 (Roeder & Emslie state
±0.03; the wider band allows for the liquid's composition range in their experiments).
Rows marked "memory" come from recalled publications (see calibration/experiments.csv).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from thermo import solutions as sol
from thermo.assemblage import assemblage_properties
from thermo.composition import oxide_molar_mass_g_per_mol, oxide_stoichiometry
from thermo.dataset import load_dataset
from thermo.errors import CompositionError, ConvergenceError
from thermo.minimize import equilibrate
from thermo.phases import build_system

ONE_BAR_GPA = 1e-4
PRESENT = 1e-7


# ------------------------------------------------------------------ helpers
def bulk_mol(formula_wt: dict[str, float]) -> np.ndarray:
    """Moles of the dataset oxides in 1 kg of a mixture given as mass proportions of formulas/oxides."""
    ds = load_dataset()
    masses = np.array([oxide_molar_mass_g_per_mol(o) for o in ds.oxides])
    mass = np.zeros(len(ds.oxides))
    for formula, amount in formula_wt.items():
        per_unit = oxide_stoichiometry(formula, ds.oxides) * masses
        mass += amount * per_unit / per_unit.sum()
    return 1000.0 * mass / mass.sum() / masses


class Join:
    """A bulk composition with a fixed list of candidate phases."""

    def __init__(self, formula_wt: dict[str, float], phases: list[str]):
        self.system = build_system(load_dataset(), bulk_mol(formula_wt), phases)
        self.b = bulk_mol(formula_wt)[self.system.component_index]

    def solve(self, p_gpa: float, t_k: float, warm=None):
        # a few states on composition edges need a nudge (reported; docs/dataset.md)
        for dt, w in ((0.0, warm), (0.0, None), (0.013, None), (-0.017, None), (0.013, warm)):
            try:
                return equilibrate(self.system, p_gpa * 1e9, t_k + dt, self.b, warm=w)
            except (ConvergenceError, CompositionError):
                continue
        raise ConvergenceError(f"no equilibrium near P = {p_gpa} GPa, T = {t_k} K", {})

    def fractions(self, eq) -> dict[str, float]:
        a = assemblage_properties(eq)
        return {p.name: p.mass_kg / a.mass_kg for p in a.phases}

    def boundary_k(self, p_gpa: float, lo: float, hi: float, test, tol_k: float = 0.2):
        """Temperature where ``test(fractions)`` changes between ``lo`` and ``hi`` (bisection)."""
        eq_lo = self.solve(p_gpa, lo)
        eq_hi = self.solve(p_gpa, hi, warm=eq_lo)
        f_lo = test(self.fractions(eq_lo))
        assert f_lo != test(self.fractions(eq_hi)), f"no change between {lo} and {hi} K"
        while hi - lo > tol_k:
            mid = 0.5 * (lo + hi)
            eq = self.solve(p_gpa, mid, warm=eq_hi)
            if test(self.fractions(eq)) == f_lo:
                lo, eq_lo = mid, eq
            else:
                hi, eq_hi = mid, eq
        return 0.5 * (lo + hi), eq_hi

    def melting_k(self, p_gpa: float, solid: str, reference_k: float, window_k: float = 250.0) -> float:
        """Temperature above which ``solid`` is gone."""
        t, _ = self.boundary_k(p_gpa, reference_k - window_k, reference_k + window_k,
                               lambda f: f.get(solid, 0.0) > PRESENT)
        return t

    def solidus_k(self, p_gpa: float, reference_k: float, window_k: float = 150.0):
        """First melting: (temperature, equilibrium just above it)."""
        return self.boundary_k(p_gpa, reference_k - window_k, reference_k + window_k,
                               lambda f: f.get("liquid", 0.0) > PRESENT)


def liquid_wt_percent(join: Join, eq, formulas: list[str]) -> dict[str, float]:
    """The liquid's composition as mass percentages of the given formulas (least squares on the oxides)."""
    ds = load_dataset()
    liq = next(p for p in eq.phases if p.model == "liquid")
    ph = join.system.solutions[liq.solution_index]
    oxides = liq.amount_mol @ ph.stoich
    basis = np.array([oxide_stoichiometry(f, ds.oxides)[join.system.component_index] for f in formulas])
    moles, *_ = np.linalg.lstsq(basis.T, oxides, rcond=None)
    masses = moles * np.array([basis_row @ [oxide_molar_mass_g_per_mol(o) for o in join.system.components]
                               for basis_row in basis])
    return {f: 100.0 * m / masses.sum() for f, m in zip(formulas, masses, strict=True)}


def xfail(reason: str):
    return pytest.mark.xfail(strict=True, reason=reason)


# ------------------------------------------------------------------ 1-bar melting of pure phases
ONE_BAR_MELTING = [
    # checks.csv M01: Bowen & Andersen (1914) Am. J. Sci. 37:487 (1890 C); 2163 K used by Ohtani & Kumazawa
    # (1981) PEPI 27:32; cross-checked.
    pytest.param({"Mg2SiO4": 100.0}, ["liquid", "forsterite"], "forsterite", 2163.0, id="M01-forsterite"),
    # checks.csv D12: Bowen & Schairer (1935) Am. J. Sci. 29:151 (1205 C); memory. (M04: 1490 K.)
    pytest.param({"Fe2SiO4": 100.0}, ["liquid", "fayalite"], "fayalite", 1478.15, id="D12-fayalite"),
    # checks.csv M08: Stebbins, Carmichael & Weill (1983) Am. Mineral. 68:717; cross-checked.
    pytest.param({"CaMgSi2O6": 100.0}, ["liquid", "diopside"], "diopside", 1665.0, id="M08-diopside"),
    # checks.csv M11: Osborn (1942) Am. J. Sci. 240:751 (1553 C); cross-checked. Fitted (anorthite-liquid H0).
    pytest.param({"CaAl2Si2O8": 100.0}, ["liquid", "anorthite"], "anorthite", 1826.15, id="M11-anorthite"),
    # checks.csv M14: Greig & Barth (1938) Am. J. Sci. 35A:93 (1118 C); memory. 0.01 wt% Al2O3 keeps the
    # bulk off the Na = Al edge where the minimizer's linear programme fails.
    pytest.param({"NaAlSi3O8": 100.0, "Al2O3": 0.01}, ["liquid", "high_albite", "corundum"], "high_albite",
                 1391.15, id="M14-albite"),
    # checks.csv M25: NIST-JANAF (Chase 1998) 2327 K; single-source.
    pytest.param({"Al2O3": 100.0}, ["liquid", "corundum"], "corundum", 2327.0, id="M25-corundum"),
]


@pytest.mark.parametrize(("bulk", "phases", "solid", "reference_k"), ONE_BAR_MELTING)
def test_one_bar_melting_point_of_pure_phase(bulk, phases, solid, reference_k):
    assert Join(bulk, phases).melting_k(ONE_BAR_GPA, solid, reference_k) == pytest.approx(reference_k, abs=20.0)


# ------------------------------------------------------------------ melting curves
MELTING_CURVES = [
    # checks.csv H01-H03: Ohtani & Kumazawa (1981) PEPI 27:32, their fit evaluated at 2, 5, 10 GPa; single-source.
    pytest.param({"Mg2SiO4": 100.0}, "forsterite", 2.0, 2262.0, id="H01-forsterite-2GPa"),
    pytest.param({"Mg2SiO4": 100.0}, "forsterite", 5.0, 2394.0, id="H02-forsterite-5GPa"),
    pytest.param({"Mg2SiO4": 100.0}, "forsterite", 10.0, 2582.0, id="H03-forsterite-10GPa"),
    # Boyd & England (1963) J. Geophys. Res. 68:311, diopside to 5 GPa; memory (two recollections in this project,
    # 1870/1900 K at 2 GPa and 2090/2150 K at 5 GPa: mid-values).
    pytest.param({"CaMgSi2O6": 100.0}, "diopside", 2.0, 1885.0, id="BE63-diopside-2GPa"),
    pytest.param({"CaMgSi2O6": 100.0}, "diopside", 5.0, 2120.0, id="BE63-diopside-5GPa"),
    # Boyd & England (1963), albite at 2 GPa, ~1290 C; memory, uncertain. The albite-liquid volume is now fitted to
    # this curve (calibration/melting_curves.csv BE63ab1-3, recalled there as 1315 C at 2 GPa): a guard, not a check.
    pytest.param({"NaAlSi3O8": 100.0, "Al2O3": 0.01}, "high_albite", 2.0, 1565.0, id="BE63-albite-2GPa"),
    # Boyd, England & Davis (1964) J. Geophys. Res. 69:2101, enstatite at 2 GPa, ~1700 C; memory, uncertain. Fitted
    # since the enstatite-liquid volume was fitted (melting_curves.csv BED64a): a guard, not a check.
    pytest.param({"MgSiO3": 100.0}, "enstatite", 2.0, 1975.0, id="BDE64-enstatite-2GPa"),
    # Ohtani, Irifune & Fujino (1981) Nature 294:62, pyrope at 3 GPa, ~1800 C; memory, uncertain.
    pytest.param({"Mg3Al2Si3O12": 100.0}, "pyrope", 3.0, 2070.0, id="OIF81-pyrope-3GPa",
                 marks=xfail("model pyrope melts at 1979 K at 3 GPa, 91 K below the recalled 2070 K")),
]


@pytest.mark.parametrize(("bulk", "solid", "pressure_gpa", "reference_k"), MELTING_CURVES)
def test_melting_curve_at_pressure(bulk, solid, pressure_gpa, reference_k):
    phases = ["liquid", solid, *(["corundum"] if "Al2O3" in bulk and len(bulk) > 1 else [])]
    t = Join(bulk, phases).melting_k(pressure_gpa, solid, reference_k, window_k=300.0)
    assert t == pytest.approx(reference_k, abs=50.0)


# ------------------------------------------------------------------ eutectics and peritectics
def test_diopside_anorthite_eutectic():
    # checks.csv D01 (1274 C; Osborn 1942; cross-checked) and D02 (liquid An42 wt%; Kojitani & Akaogi 2003
    # Am. Mineral. 88:1020; cross-checked). Fitted rows.
    join = Join({"CaMgSi2O6": 58.0, "CaAl2Si2O8": 42.0}, ["liquid", "diopside", "anorthite"])
    t, eq = join.solidus_k(ONE_BAR_GPA, 1547.15)
    assert t == pytest.approx(1547.15, abs=20.0)
    # just above the eutectic one solid is left and the liquid sits at the eutectic composition
    assert liquid_wt_percent(join, eq, ["CaMgSi2O6", "CaAl2Si2O8"])["CaAl2Si2O8"] == pytest.approx(42.0, abs=5.0)


@xfail("model melt fraction of An60Di40 at 1300 C is 0.702, 0.038 below 0.74 +/- 0.03 (its An60 liquidus is "
       "18 K high)")
def test_diopside_anorthite_melt_fraction_at_1300c():
    # checks.csv D04: An60Di40 at 1300 C is 74 +/- 3 % liquid (lever rule on Osborn's diagram); single-source.
    # Not fitted.
    join = Join({"CaMgSi2O6": 40.0, "CaAl2Si2O8": 60.0}, ["liquid", "diopside", "anorthite"])
    assert join.fractions(join.solve(ONE_BAR_GPA, 1573.15))["liquid"] == pytest.approx(0.74, abs=0.03)


def test_forsterite_diopside_anorthite_eutectic():
    # Osborn & Tait (1952) Am. J. Sci. Bowen Vol.:413, 1270 C (memory); liquid Di49 Fo7.5 An43.5 wt% from
    # Kojitani & Akaogi (2003) (checks.csv C06, single-source). Fitted row.
    formulas = ["CaMgSi2O6", "Mg2SiO4", "CaAl2Si2O8"]
    join = Join(dict(zip(formulas, [49.0, 7.5, 43.5], strict=True)),
                ["liquid", "forsterite", "diopside", "anorthite", "spinel"])
    t, eq = join.solidus_k(ONE_BAR_GPA, 1543.15)
    assert t == pytest.approx(1543.15, abs=20.0)
    found = liquid_wt_percent(join, eq, formulas)
    for formula, expected in zip(formulas, [49.0, 7.5, 43.5], strict=True):
        assert found[formula] == pytest.approx(expected, abs=5.0)


def test_enstatite_melts_incongruently_at_one_bar():
    # checks.csv M06: MgSiO3 -> forsterite + liquid at 1557 C (Bowen & Andersen 1914); memory. Peritectic
    # liquid ~61 wt% SiO2 (memory, uncertain). Fitted row.
    join = Join({"MgSiO3": 100.0}, ["liquid", "forsterite", "enstatite", "quartz"])
    t, eq = join.solidus_k(ONE_BAR_GPA, 1830.15)
    assert t == pytest.approx(1830.15, abs=20.0)
    assert join.fractions(eq).get("forsterite", 0.0) > 0.0  # forsterite + liquid above the peritectic
    assert liquid_wt_percent(join, eq, ["MgO", "SiO2"])["SiO2"] == pytest.approx(61.0, abs=5.0)


def test_enstatite_silica_eutectic():
    # checks.csv D14: 1543 C, liquid ~64.5 wt% SiO2 (Bowen & Andersen 1914; Greig 1927); memory. The silica phase
    # at the eutectic is cristobalite (derived from NIST-JANAF, docs/dataset.md); with quartz only, the tiny entropy
    # of fusion of silica turned ~1-2 kJ/mol into ~200 K (1614 K).
    join = Join({"SiO2": 64.5, "MgO": 35.5}, ["liquid", "forsterite", "enstatite", "quartz", "cristobalite"])
    t, _ = join.solidus_k(ONE_BAR_GPA, 1816.15, window_k=300.0)
    assert t == pytest.approx(1816.15, abs=20.0)


@xfail("model diopside-albite minimum at 1363 K, 43 K below 1406 K (1133 C)")
def test_diopside_albite_minimum():
    # checks.csv D09: Bowen (1915) Am. J. Sci. 40:161 as drawn in Gill (2015), 1133 C; single-source. Not fitted.
    join = Join({"CaMgSi2O6": 30.0, "NaAlSi3O8": 70.0}, ["liquid", "diopside", "plagioclase"])
    t, _ = join.solidus_k(ONE_BAR_GPA, 1406.15)
    assert t == pytest.approx(1406.15, abs=20.0)


# ------------------------------------------------------------------ olivine-liquid Fe-Mg exchange
#: checks.csv C05: mean ocean-ridge basalt (Gale et al. 2013 G3 14:489; memory) in NCFMAS.
MORB = {"SiO2": 50.47, "Al2O3": 14.70, "FeO": 10.43, "MgO": 7.58, "CaO": 11.39, "Na2O": 2.79}


def olivine_liquid_kd(temperature_k: float) -> float:
    """KD = (Fe/Mg)ol/(Fe/Mg)liq of the olivine in equilibrium with the (all-liquid) MORB at T."""
    join = Join(MORB, ["liquid", "olivine"])
    eq = join.solve(ONE_BAR_GPA, temperature_k)
    assert [p.model for p in eq.phases] == ["liquid"]
    ol = next(s for s in join.system.solutions if s.name == "olivine")
    g0 = eq.standard.g_j_per_mol[ol.endmember_index]
    target = ol.stoich @ eq.mu
    i_fa = list(ol.model.endmembers).index("fayalite")

    def driving_force(x_fa):
        x = np.full(2, 1.0 - x_fa)
        x[i_fa] = x_fa
        return float(x @ (sol.chemical_potentials(ol.model, x, g0, temperature_k, 1e5) - target))

    x_fa = minimize_scalar(driving_force, bounds=(1e-6, 1 - 1e-6), method="bounded", options={"xatol": 1e-9}).x
    comps = list(join.system.components)
    fe_mg_liq = join.b[comps.index("FeO")] / join.b[comps.index("MgO")]
    return x_fa / (1.0 - x_fa) / fe_mg_liq


@pytest.mark.parametrize("temperature_k", [
    # checks.csv D13: Roeder & Emslie (1970) Contrib. Mineral. Petrol. 29:275, KD = 0.30 (memory); fitted at 1473 K.
    pytest.param(1473.15, id="D13-1473K"),
    # Same liquid at 1623 K, held out: Roeder & Emslie found KD independent of temperature (1150-1300 C).
    pytest.param(1623.15, id="D13-1623K",
                 marks=xfail("model KD rises with temperature: 0.374 at 1623 K (0.327 at 1473 K)")),
])
def test_olivine_liquid_fe_mg_exchange(temperature_k):
    assert olivine_liquid_kd(temperature_k) == pytest.approx(0.30, abs=0.05)


# ------------------------------------------------------------------ the loader applies the calibration
def test_liquid_calibration_file_is_applied_at_load_time():
    import csv
    import tomllib

    from thermo.dataset import DATA_DIR, DEFAULT_DATASET_ID
    from thermo.phases import solution_models

    directory = DATA_DIR / DEFAULT_DATASET_ID
    cal = tomllib.loads((directory / "liquid_calibration.toml").read_text(encoding="utf-8"))
    assert "liquid_calibration.toml" in tomllib.loads((directory / "manifest.toml").read_text())["files"]
    ds = load_dataset()
    liquid = solution_models(ds)["liquid"]
    for name, entry in cal["mixing_units"].items():
        i = liquid.endmembers.index(name)
        assert liquid.units[i] == pytest.approx(entry["value"]) and liquid.alpha[i] == pytest.approx(entry["value"])
    for inter in cal["interactions"]:
        i, j = sorted(liquid.endmembers.index(e) for e in inter["pair"])
        assert liquid.w_h[i, j] == pytest.approx(inter["w_h_j_per_mol"])
    with (directory / "endmembers.csv").open(encoding="utf-8", newline="") as fh:
        raw = {r["name"]: r for r in csv.DictReader(fh)}
    for adj in cal["endmember_adjustments"]:
        name = adj["endmember"]
        i = ds.index(name)
        assert ds.endmembers.h0[i] == pytest.approx(float(raw[name]["h0_j_per_mol"]) + adj["dh0_j_per_mol"])
        assert ds.endmembers.s0[i] == pytest.approx(float(raw[name]["s0_j_per_mol_k"]) + adj["ds0_j_per_mol_k"])
