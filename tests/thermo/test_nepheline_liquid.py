"""The nepheline-composition liquid (NaAlSiO4), derived in calibration/nepheline_liquid.py from published data.

The row reproduces its sources (the checks below would catch an edit of the row, of the nepheline it is anchored
to, or of the liquid equation of state), and it does what it was added for: a sodium species that needs little
silica, so that silica-poor melts no longer push jadeite-rich clinopyroxene onto their liquidus (docs/dataset.md).
"""

from __future__ import annotations

import pytest
from scipy.optimize import brentq

from thermo.dataset import load_dataset
from thermo.endmembers import standard_state
from thermo.equilibrium import prepare, solve_point

from .test_natural_compositions import KLB1_WT_PERCENT

ONE_BAR_PA = 1.0e5


@pytest.fixture(scope="module")
def pair():
    return load_dataset().endmembers.subset(["nepheline", "nepheline_liquid"])


def test_nepheline_melts_metastably_with_the_calorimetric_fusion_enthalpy(pair):
    # Stebbins, Carmichael & Weill (1983) Am. Mineral. 68:717 (reference/checks.csv M19): 49.0 +/- 2.1 kJ/mol,
    # quoted at 1750 K, which the derivation takes as the metastable melting point (tolerance: its +/-2.1 kJ/mol;
    # the melting point only to the 0.5 K of the anchoring).
    tm = brentq(lambda t: float(standard_state(pair, ONE_BAR_PA, t).g_j_per_mol @ [-1.0, 1.0]), 1300.0, 2300.0)
    st = standard_state(pair, ONE_BAR_PA, tm)
    assert tm == pytest.approx(1750.0, abs=0.5)
    assert (st.h_j_per_mol[1] - st.h_j_per_mol[0]) / 1e3 == pytest.approx(49.0, abs=2.1)


def test_nepheline_liquid_heat_capacity_and_volume_are_the_additive_oxide_values(pair):
    # Cp: 1/2 Na2O + 1/2 Al2O3 + SiO2 of the additive model (checks.csv L05, L02, L01: 102.3, 157.6, 80.0 J/(mol K);
    # the model's stated uncertainty ~2 %). V at 1673 K: 1/2 * 29.0 + 1/2 * 37.1 + 26.9 cm3/mol (Lange & Carmichael
    # 1987, checks.csv L14, memory; within the 1 % of their fit).
    st = standard_state(pair, ONE_BAR_PA, 1673.0)
    assert st.cp_j_per_mol_k[1] == pytest.approx(209.95, rel=0.02)
    assert st.v_m3_per_mol[1] * 1e6 == pytest.approx(59.95, rel=0.01)


@pytest.mark.parametrize(("pressure_gpa", "temperature_k"), [(15.0, 2600.0), (20.0, 2900.0), (25.0, 3200.0)])
def test_no_clinopyroxene_beside_a_peridotite_melt_far_above_its_solidus(pressure_gpa, temperature_k):
    # Zhang & Herzberg (1994) J. Geophys. Res. 99:17729 and Herzberg & Zhang (1996) J. Geophys. Res. 101:8271
    # (memory): in fertile peridotite at 15-25 GPa clinopyroxene is at most a near-solidus phase, never on the
    # liquidus (olivine/wadsleyite, majorite, then ferropericlase/bridgmanite are). 2600-3200 K is >= 300 K above the
    # solidus of Herzberg, Raterron & Zhang (2000). Without the nepheline liquid the model kept a jadeite-rich
    # clinopyroxene beside the melt (0.3 wt% for KLB-1 at 20 GPa and 2900 K; 1.5-2 wt% of 70-80 % jadeite in the
    # Na-richer peridotite-like demo bulk).
    _, assemblage = solve_point(prepare(KLB1_WT_PERCENT, drop_unsupported=True), pressure_gpa, temperature_k)
    assert "liquid" in {p.name for p in assemblage.phases}
    assert "clinopyroxene" not in {p.name for p in assemblage.phases}
