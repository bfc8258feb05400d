"""High cristobalite, the 1-bar high-temperature silica phase (derived from NIST-JANAF).

The row of endmembers.csv comes from calibration/cristobalite_from_janaf.py: Cp fitted to the JANAF
high-cristobalite table (Chase 1998, J. Phys. Chem. Ref. Data Monograph 9, table O-035, read offline
with the ``janaf`` package) and H, S anchored to the dataset's quartz plus JANAF's cristobalite-quartz
difference at 1600 K. The first two tests check that derivation against the tables (not independent);
the others check the phase relations it implies against the silica phase diagram and calorimetry.
"""

import janaf
import numpy as np
import polars as pl
import pytest
from scipy.optimize import brentq

from thermo.dataset import load_dataset
from thermo.endmembers import standard_state

ONE_BAR_PA = 1.0e5
GPA = 1.0e9


@pytest.fixture(scope="module")
def silica():
    return load_dataset().endmembers.subset(["quartz", "cristobalite", "coesite", "stishovite", "silica_liquid"])


def _janaf(table_id: str, temps) -> pl.DataFrame:
    df = janaf.Table(table_id).df
    return df.filter(pl.col("T(K)").is_in(list(temps))).sort("T(K)")


def test_cristobalite_minus_quartz_gibbs_energy_follows_janaf(silica):
    # JANAF O-035 minus O-037 (delta-f G). By construction equal at 1600 K; elsewhere the dataset's quartz
    # Cp differs slightly from JANAF's (up to 91 J/mol of G at 2000 K), hence +/-150 J/mol.
    temps = [1100.0, 1300.0, 1500.0, 1700.0, 1900.0, 2000.0]
    c, q = _janaf("O-035", temps), _janaf("O-037", temps)
    reference = (c["delta-f G"].to_numpy() - q["delta-f G"].to_numpy()) * 1e3
    g = standard_state(silica, ONE_BAR_PA, np.array(temps)).g_j_per_mol
    np.testing.assert_allclose(g[:, 1] - g[:, 0], reference, atol=150.0)


def test_cristobalite_heat_capacity_and_entropy_follow_janaf(silica):
    # JANAF O-035, 500-2000 K; tolerances of tests/thermo/test_endmembers_janaf.py (Cp 3 %, S 1.5 %).
    temps = np.arange(500.0, 2001.0, 100.0)
    ref = _janaf("O-035", temps)
    state = standard_state(silica, ONE_BAR_PA, temps)
    np.testing.assert_allclose(state.cp_j_per_mol_k[:, 1], ref["Cp"].to_numpy(), rtol=0.03)
    np.testing.assert_allclose(state.s_j_per_mol_k[:, 1], ref["S"].to_numpy(), rtol=0.015)


def test_quartz_gives_way_to_a_high_temperature_polymorph_near_1100_k_at_one_bar(silica):
    # JANAF's quartz and high-cristobalite tables cross near 1080 K; in nature quartz turns to tridymite at
    # ~1140 K (867 C; memory) and tridymite to cristobalite at ~1743 K, the two high forms being within a
    # few hundred J/mol of each other. Window 1000-1200 K.
    def gap(t):
        g = standard_state(silica, ONE_BAR_PA, t).g_j_per_mol
        return float(g[1] - g[0])

    assert 1000.0 <= brentq(gap, 700.0, 1600.0) <= 1200.0


def test_cristobalite_melts_where_calorimetry_puts_it_with_its_small_fusion_enthalpy(silica):
    # checks.csv M22/M23: Richet et al. (1982) Geochim. Cosmochim. Acta 46:2639 (memory): cristobalite
    # melts at 1999 +/- 10 K with 8.92 +/- 1.0 kJ/mol. The melting point is a fitted row (M22: it sets the
    # silica-liquid enthalpy shift of liquid_calibration.toml); the fusion enthalpy is not fitted.
    def gap(t):
        g = standard_state(silica, ONE_BAR_PA, t).g_j_per_mol
        return float(g[4] - g[1])

    t_m = brentq(gap, 1500.0, 2600.0)
    assert t_m == pytest.approx(1999.0, abs=10.0)
    h = standard_state(silica, ONE_BAR_PA, t_m).h_j_per_mol
    assert (h[4] - h[1]) / 1e3 == pytest.approx(8.92, abs=2.0)  # +/-1.0 kJ/mol doubled for the recollection


def test_cristobalite_field_closes_below_one_gpa(silica):
    # Silica phase diagram (e.g. Jackson 1976 Phys. Earth Planet. Inter. 13:218; Kanzaki 1990 J. Am. Ceram.
    # Soc. 73:3706; memory): cristobalite is a low-pressure phase, gone by a few tenths of a GPa.
    p, t = np.meshgrid(np.linspace(1.0 * GPA, 25.0 * GPA, 97), np.linspace(800.0, 3500.0, 55))
    g = standard_state(silica, p, t).g_j_per_mol
    assert np.all(g[..., 1] > g[..., [0, 2, 3]].min(axis=-1))
