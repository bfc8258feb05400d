"""Small liquid models for binary joins, used to check the minimizer against classic 1-bar diagrams.

Each model is documented with the origin of its parameters. They are test fixtures: the
default dataset's own melt model lives in ``thermo/data/heatpath-ncfmas-2026a``.
"""

from __future__ import annotations

import dataclasses

import numpy as np
from scipy.optimize import brentq

from thermo.dataset import Dataset, load_dataset
from thermo.endmembers import standard_state
from thermo.solutions import SolutionModel, solution_from_spec

#: Anorthite melting point at 1 bar, 1553 °C (Osborn 1942, Am. J. Sci. 240:751; checks.csv M11).
ANORTHITE_MELTING_K = 1826.15


def anorthite_liquid_shift(ds: Dataset) -> float:
    """ΔG [J/mol] of anorthite melting at its observed melting point, with the dataset values.

    The dataset's anorthite liquid melts 60 K low (checks.md); lowering its H0 by this
    amount moves its melting point to 1826 K without changing ΔS or ΔCp of fusion.
    """
    sub = ds.endmembers.subset(["anorthite", "anorthite_liquid"])
    g = standard_state(sub, 1e5, ANORTHITE_MELTING_K).g_j_per_mol
    return float(g[1] - g[0])


def recalled_liquid_parameters(ds: Dataset) -> Dataset:
    """The dataset with the melt calibration's liquid H0/S0 shifts undone (the recalled table values).

    The binary models below were fitted on the recalled values; the default melt model's own
    adjustments (liquid_calibration.toml) belong to its multicomponent liquid, not to them.
    """
    h0, s0 = ds.endmembers.h0.copy(), ds.endmembers.s0.copy()
    for adj in ds.extra.get("liquid_calibration", {}).get("endmember_adjustments", []):
        i = ds.index(adj["endmember"])
        h0[i] -= float(adj.get("dh0_j_per_mol", 0.0))
        s0[i] -= float(adj.get("ds0_j_per_mol_k", 0.0))
    return dataclasses.replace(ds, endmembers=dataclasses.replace(ds.endmembers, h0=h0, s0=s0))


def dataset_with_anorthite_liquid_at_observed_melting() -> Dataset:
    """Recalled liquid values with anorthite_liquid H0 shifted so anorthite melts at 1826 K."""
    ds = recalled_liquid_parameters(load_dataset())
    h0 = ds.endmembers.h0.copy()
    h0[ds.index("anorthite_liquid")] -= anorthite_liquid_shift(ds)
    return dataclasses.replace(ds, endmembers=dataclasses.replace(ds.endmembers, h0=h0))


def diopside_anorthite_liquid() -> SolutionModel:
    """Di-An liquid: mixing units (di 0.807, an 1) and W_H = -23.2 kJ/mol.

    The two parameters were fitted (by the lead, 2026) to the eutectic temperature
    1274 °C (Osborn 1942; checks.csv D01) and the liquidus of An60, 1389 °C (D03), with the
    anorthite liquid at its observed melting point. Not fitted, and so a validation: the
    eutectic composition (D02), the melt fraction of An60 at 1300 °C (D04) and the heat of
    mixing at the eutectic, W·x(1-x) ≈ -5.4 kJ/mol, within the measured -4 to -10 kJ/mol of
    CMAS eutectic liquids (Kojitani & Akaogi 2003, Am. Mineral. 88:1020; checks.md).
    """
    names = ["diopside_liquid", "anorthite_liquid"]
    return solution_from_spec("liquid", {
        "endmembers": names, "mixing": "units", "liquid": True,
        "mixing_units": {"diopside_liquid": 0.807, "anorthite_liquid": 1.0},
        "interactions": [{"pair": names, "w_h_j_per_mol": -23201.0}],
    }, "binary_models")


def forsterite_fayalite_liquid() -> SolutionModel:
    """Fo-Fa liquid: ideal mixing of Mg and Fe over the two cation positions of M2SiO4 (2 units each).

    No fitted parameter: the unit count mirrors the two octahedral sites of olivine.
    """
    names = ["forsterite_liquid", "fayalite_liquid"]
    return solution_from_spec("liquid", {
        "endmembers": names, "mixing": "units", "liquid": True,
        "mixing_units": {"forsterite_liquid": 2.0, "fayalite_liquid": 2.0},
    }, "binary_models")


def albite_anorthite_liquid() -> SolutionModel:
    """Ab-An liquid: ideal molecular mixing (one unit per species), no fitted parameter."""
    names = ["albite_liquid", "anorthite_liquid"]
    return solution_from_spec("liquid", {"endmembers": names, "mixing": "units", "liquid": True}, "binary_models")


def join_bulk(ds: Dataset, first: str, second: str, wt_percent_first: float) -> np.ndarray:
    """Moles of the dataset oxides in 100 g of a mixture of two endmembers (exactly on the join)."""
    m1 = ds.info[first].molar_mass_kg_per_mol * 1000.0
    m2 = ds.info[second].molar_mass_kg_per_mol * 1000.0
    return (wt_percent_first / m1) * ds.stoichiometry[ds.index(first)] + (
        (100.0 - wt_percent_first) / m2
    ) * ds.stoichiometry[ds.index(second)]


def root_temperature(fun, lo: float, hi: float, xtol: float = 1e-3) -> float:
    """Temperature where ``fun`` changes sign in [lo, hi] (Brent's method)."""
    return float(brentq(fun, lo, hi, xtol=xtol))
