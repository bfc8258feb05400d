"""Endmember Cp, S and H − H(298.15 K) at 1 bar against the NIST-JANAF tables.

Reference for every check in this file: Chase M.W. Jr (1998) NIST-JANAF
Thermochemical Tables, 4th ed., J. Phys. Chem. Ref. Data Monograph 9, read
offline from the ``janaf`` package (provenance: single-source, the tables
themselves).

Tolerances: Cp within 3 %, S within 1.5 %, H − H298 within 2 % over
400-2000 K. These are the project's acceptance limits for an internally
consistent dataset fitted to phase equilibria as well as calorimetry; they are
wider than JANAF's own uncertainty for well-measured oxides (a few tenths of a
percent; from memory) and about the size of the scatter between high-temperature
calorimetric studies of silicates (1-3 %, common practice).

Where JANAF itself is a poor reference the rows are left out, and the reason
is stated beside the phase:
- JANAF continues a crystal past its melting point (a metastable
  extrapolation): rows above the JANAF melting point are never used.
- Where JANAF's Cp becomes a straight line in T (second differences of the
  tabulated Cp are zero) it is an extrapolation, not data: Cp is not tested
  there.
- Forsterite: JANAF's S298 (95.14 J/(mol K)) is about 1 J/(mol K) above
  adiabatic calorimetry (94.11, Robie, Hemingway & Takei 1982, checks.csv
  S01). The dataset's S0 (95.1) sits with JANAF, so this comparison cannot see
  that offset; test_standard_thermo.py checks S01 separately.
- Spinel is not compared here: JANAF's S includes cation disorder (checks.csv
  S09, S23, S27; see test_standard_thermo.py).
"""

from __future__ import annotations

import janaf
import numpy as np
import pytest

from thermo.dataset import load_dataset
from thermo.endmembers import T_REF_K, standard_state

ONE_BAR_PA = 1.0e5
T_LOW_K = 400.0
TOLERANCE = {"cp": 0.03, "s": 0.015, "h": 0.02}

# name: (JANAF table id, fragment of the table's title, highest T for Cp [K], highest T for S and H [K])
JANAF_TABLES = {
    # Mg2SiO4 (cr); JANAF melts it at 2171 K.
    "forsterite": ("Mg-028", "Mg2SiO4", 2000.0, 2000.0),
    "periclase": ("Mg-008", "MgO", 2000.0, 2000.0),
    # Al2O3 alpha (cr): the tabulated Cp is linear in T from 1900 K on (zero second
    # differences from 2000 K), i.e. an extrapolation; Cp is tested to 1900 K.
    "corundum": ("Al-096", "Al2O3", 1900.0, 2000.0),
    # SiO2 quartz (cr): JANAF melts (metastable) quartz at 1696 K (checks.csv J04), so rows
    # stop at 1600 K. JANAF writes beta-quartz Cp as a straight line in T over the whole beta
    # field; it is kept because it is JANAF's representation of the measured beta field up
    # to its melting point, not an extrapolation past it.
    "quartz": ("O-037", "SiO2", 1600.0, 1600.0),
    "lime": ("Ca-027", "CaO", 2000.0, 2000.0),
    # Al2SiO5 polymorphs: JANAF's tables rest on drop calorimetry to about 1500 K (Pankratz &
    # Kelley 1964, US Bur. Mines RI 6370; from memory), and at 1 bar kyanite and andalusite
    # break down to mullite + silica at about 1400-1700 K (from memory), so rows above 1500 K
    # are extrapolations of a metastable crystal. Measured for the record (not tested):
    # Cp at 2000 K is 4.9 % (ky), 3.8 % (sil) and 4.0 % (and) below JANAF.
    "kyanite": ("Al-103", "Kyanite", 1500.0, 1500.0),
    "sillimanite": ("Al-104", "Sillimanite", 1500.0, 1500.0),
    "andalusite": ("Al-102", "Andalusite", 1500.0, 1500.0),
    # TiO2 rutile (cr): JANAF melts it at 2130 K; its Cp is linear in T from 1800 K on (zero
    # second differences), so Cp is tested to 1700 K.
    "rutile": ("O-043", "Rutile", 1700.0, 2000.0),
}

# The dataset's rutile Cp (c = 0 in Cp = a + bT + c/T² + d/√T) matches JANAF at 298 K
# (0.06 %) but runs below it from 400 to 1200 K and above it from 1300 K on.
RUTILE_XFAIL = {
    "cp": "dataset rutile Cp is 4.8 % below JANAF at 500 K (63.95 vs 67.20 J/(mol K)) and 2.8 % above at 1700 K",
    "s": "dataset rutile S is 2.0 % below JANAF at 900-1000 K (129.13 vs 131.82 J/(mol K) at 1000 K)",
    "h": "dataset rutile H-H298 is 4.1 % below JANAF at 700 K (25.44 vs 26.52 kJ/mol)",
}


def _janaf_reference(table_id: str, title: str, t_max: float, quantity: str) -> tuple[np.ndarray, np.ndarray]:
    """Temperatures [K] and JANAF values (Cp, S in J/(mol K); H − H298 in J/mol) at 100 K steps."""
    table = janaf.Table(table_id)
    assert title in table.name, f"JANAF table {table_id} is {table.name!r}, expected {title}"
    df = table.df
    temps = df["T(K)"].to_numpy()
    notes = df["Note"].to_list()
    column = {"cp": "Cp", "s": "S", "h": "H-H(Tr)"}[quantity]
    values = df[column].to_numpy() * (1000.0 if quantity == "h" else 1.0)
    keep = [i for i, t in enumerate(temps) if T_LOW_K <= t <= t_max and t % 100.0 == 0.0 and notes[i] is None]
    return temps[keep], values[keep]


def _model(name: str, temps: np.ndarray, quantity: str) -> np.ndarray:
    params = load_dataset().endmembers.subset([name])
    state = standard_state(params, ONE_BAR_PA, temps)
    if quantity == "cp":
        return state.cp_j_per_mol_k[:, 0]
    if quantity == "s":
        return state.s_j_per_mol_k[:, 0]
    h298 = standard_state(params, ONE_BAR_PA, T_REF_K).h_j_per_mol[0]
    return state.h_j_per_mol[:, 0] - h298


def _cases():
    for name, (table_id, title, t_cp, t_sh) in JANAF_TABLES.items():
        for quantity in ("cp", "s", "h"):
            t_max = t_cp if quantity == "cp" else t_sh
            marks = ()
            if name == "rutile":
                marks = pytest.mark.xfail(strict=True, reason=RUTILE_XFAIL[quantity])
            yield pytest.param(name, table_id, title, t_max, quantity, marks=marks, id=f"{name}-{quantity}")


@pytest.mark.parametrize(("name", "table_id", "title", "t_max", "quantity"), list(_cases()))
def test_one_bar_properties_follow_janaf(name, table_id, title, t_max, quantity):
    temps, reference = _janaf_reference(table_id, title, t_max, quantity)
    assert temps.size >= 10, f"too few JANAF rows for {name}"
    deviation = _model(name, temps, quantity) / reference - 1.0
    worst = int(np.argmax(np.abs(deviation)))
    assert np.all(np.abs(deviation) <= TOLERANCE[quantity]), (
        f"{name} {quantity}: worst deviation {100 * deviation[worst]:+.2f} % at {temps[worst]:.0f} K "
        f"(tolerance {100 * TOLERANCE[quantity]:.1f} %)"
    )


def test_quartz_alpha_beta_transition_matches_janaf_beta_side():
    """S and H − H298 at the α-β transition (847 K), JANAF O-037.

    JANAF treats the transition as first order (two rows at 847 K, ΔH = 0.73
    kJ/mol). The Landau model of the dataset (Holland & Powell 1998, J.
    Metamorph. Geol. 16:309) is continuous: the transition entropy and
    enthalpy are taken up below Tc, where Cp rises as (1 − T/Tc)^(-1/2). At Tc
    the model has absorbed all of it, so it is compared with JANAF's β-side
    row. Cp at Tc is not compared (the Landau Cp diverges there by design).
    """
    df = janaf.Table("O-037").df
    at_tc = df.filter(df["T(K)"] == 847.0)
    beta = at_tc.row(int(np.argmax(at_tc["S"].to_numpy())), named=True)
    params = load_dataset().endmembers.subset(["quartz"])
    state = standard_state(params, ONE_BAR_PA, np.array([T_REF_K, 847.0]))
    assert state.s_j_per_mol_k[1, 0] == pytest.approx(beta["S"], rel=TOLERANCE["s"])
    dh = state.h_j_per_mol[1, 0] - state.h_j_per_mol[0, 0]
    assert dh == pytest.approx(1000.0 * beta["H-H(Tr)"], rel=TOLERANCE["h"])
    # The Landau Cp spike is present just below Tc: above JANAF's alpha-side Cp at 847 K.
    cp_near_tc = standard_state(params, ONE_BAR_PA, np.array([800.0, 840.0, 846.9])).cp_j_per_mol_k[:, 0]
    assert np.all(np.diff(cp_near_tc) > 0.0)
    assert cp_near_tc[-1] > at_tc["Cp"].max()
