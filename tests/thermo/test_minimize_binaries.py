"""The minimizer against classic 1-bar phase diagrams of binary joins.

Liquid models for each join are documented in ``tests/thermo/binary_models.py``; solids
come from the default dataset. Experimental values and their sources are in
``../shared/reference/checks.csv`` (row ids given beside each check).
"""

import numpy as np
import pytest
from scipy.constants import R

from tests.thermo import binary_models as bm
from thermo.assemblage import assemblage_properties
from thermo.endmembers import standard_state
from thermo.minimize import equilibrate
from thermo.phases import build_system
from thermo.solutions import solution_from_spec

ONE_BAR = 1e5


def _system(ds, bulk, phases, models):
    system = build_system(ds, bulk, phases=phases, extra_models=models)
    return system, bulk[system.component_index]


def _melt_fraction(system, bulk, t):
    return assemblage_properties(equilibrate(system, ONE_BAR, t, bulk)).melt_fraction


@pytest.fixture(scope="module")
def di_an():
    ds = bm.dataset_with_anorthite_liquid_at_observed_melting()
    return ds, [bm.diopside_anorthite_liquid()]


def test_di_an_eutectic_temperature_matches_osborn(di_an):
    """D01: eutectic 1274 °C (Osborn 1942, Am. J. Sci. 240:751; cross-checked). Fitted: tolerance ±15 K."""
    ds, models = di_an
    system, bulk = _system(ds, bm.join_bulk(ds, "anorthite", "diopside", 42.0), ["diopside", "anorthite", "liquid"],
                           models)
    solidus = bm.root_temperature(lambda t: _melt_fraction(system, bulk, t) - 1e-9, 1450.0, 1650.0)
    assert solidus == pytest.approx(1274.0 + 273.15, abs=15.0)


def test_di_an_eutectic_liquid_composition_matches_kojitani_and_akaogi(di_an):
    """D02: eutectic liquid An42 wt % (Kojitani & Akaogi 2003, Am. Mineral. 88:1020; cross-checked); ±5 wt %.

    Not fitted: a validation of the two-parameter liquid model.
    """
    ds, models = di_an
    system, bulk = _system(ds, bm.join_bulk(ds, "anorthite", "diopside", 60.0), ["diopside", "anorthite", "liquid"],
                           models)
    solidus = bm.root_temperature(lambda t: _melt_fraction(system, bulk, t) - 1e-9, 1450.0, 1650.0)
    a = assemblage_properties(equilibrate(system, ONE_BAR, solidus + 0.05, bulk))
    liquid = a.phase("liquid")
    x = dict(zip(liquid.endmembers, liquid.endmember_fractions, strict=True))
    m_an, m_di = 278.204, 216.548  # g/mol, IUPAC atomic weights
    wt_an = 100 * x["anorthite_liquid"] * m_an / (x["anorthite_liquid"] * m_an + x["diopside_liquid"] * m_di)
    assert wt_an == pytest.approx(42.0, abs=5.0)


def test_di_an_an60_liquidus_and_saturating_phase(di_an):
    """D03: An60 liquidus 1389 °C with anorthite first (Osborn 1942 via a diagram read-out; single-source).

    Fitted parameter, so only the phase identity is an independent check; ±15 K.
    """
    ds, models = di_an
    system, bulk = _system(ds, bm.join_bulk(ds, "anorthite", "diopside", 60.0), ["diopside", "anorthite", "liquid"],
                           models)
    liquidus = bm.root_temperature(lambda t: _melt_fraction(system, bulk, t) - (1 - 1e-9), 1500.0, 1800.0)
    assert liquidus == pytest.approx(1389.0 + 273.15, abs=15.0)
    below = assemblage_properties(equilibrate(system, ONE_BAR, liquidus - 2.0, bulk))
    assert sorted(p.name for p in below.phases) == ["anorthite", "liquid"]


def test_di_an_an60_melt_fraction_at_1300_c(di_an):
    """D04: 0.74 ± 0.03 liquid at 1300 °C (lever rule on Osborn's diagram; single-source). Not fitted."""
    ds, models = di_an
    system, bulk = _system(ds, bm.join_bulk(ds, "anorthite", "diopside", 60.0), ["diopside", "anorthite", "liquid"],
                           models)
    assert _melt_fraction(system, bulk, 1573.15) == pytest.approx(0.74, abs=0.03)


@pytest.fixture(scope="module")
def fo_fa():
    ds = bm.recalled_liquid_parameters(bm.load_dataset())
    return ds, [bm.forsterite_fayalite_liquid()]


@pytest.mark.parametrize(("first", "observed_c"), [("forsterite", 1890.0), ("fayalite", 1205.0)])
def test_fo_fa_loop_endpoints_match_bowen_and_schairer(fo_fa, first, observed_c):
    """D12: Fo melts at 1890 °C, Fa at 1205 °C (Bowen & Schairer 1935, Am. J. Sci. 29:151; memory); ±25 K."""
    ds, models = fo_fa
    bulk = ds.stoichiometry[ds.index(first)] * 1.0
    system, bulk = _system(ds, bulk, ["olivine", "liquid"], models)
    tm = bm.root_temperature(lambda t: _melt_fraction(system, bulk, t) - 0.5, 1300.0, 2400.0)
    assert tm == pytest.approx(observed_c + 273.15, abs=25.0)


def _ideal_loop(ds, x_fo_bulk, t):
    """Independent two-phase loop for ideal 2-site olivine and ideal 2-unit liquid (Roozeboom type I).

    With K_i = exp(-ΔG_fus,i/(2RT)) = x_i(liq)/x_i(ol): x_fo(ol) = (1 - K_fa)/(K_fo - K_fa).
    Returns the melt mole fraction of formula units at temperature t.
    """
    sub = ds.endmembers.subset(["forsterite", "fayalite", "forsterite_liquid", "fayalite_liquid"])
    g = standard_state(sub, ONE_BAR, t).g_j_per_mol
    k_fo = np.exp(-(g[2] - g[0]) / (2 * R * t))
    k_fa = np.exp(-(g[3] - g[1]) / (2 * R * t))
    x_ol = (1 - k_fa) / (k_fo - k_fa)
    x_liq = k_fo * x_ol
    return (x_fo_bulk - x_ol) / (x_liq - x_ol)


def test_fo_fa_loop_matches_independent_ideal_loop_calculation(fo_fa):
    """With ideal olivine, the minimizer's melt fraction equals the analytic loop to 1e-7."""
    ds, models = fo_fa
    ideal_ol = solution_from_spec("olivine_ideal", {
        "endmembers": ["forsterite", "fayalite"], "sites": [{"name": "M", "multiplicity": 2, "species": ["Mg", "Fe"]}],
        "occupancy": {"forsterite": {"M": "Mg"}, "fayalite": {"M": "Fe"}}}, "test")
    bulk = 0.5 * ds.stoichiometry[ds.index("forsterite")] + 0.5 * ds.stoichiometry[ds.index("fayalite")]
    system, b = _system(ds, bulk, ["olivine_ideal", "liquid"], [*models, ideal_ol])
    for t in (1700.0, 1775.0, 1850.0):  # inside the loop of a 50:50 molar bulk
        eq = equilibrate(system, ONE_BAR, t, b)
        liquid = next(p for p in eq.phases if p.model == "liquid")
        phi_mol = liquid.amount_mol.sum() / 1.0
        assert phi_mol == pytest.approx(_ideal_loop(ds, 0.5, t), abs=1e-7)


def test_olivine_liquid_fe_mg_exchange_coefficient_near_roeder_emslie(fo_fa):
    """D13: KD = (Fe/Mg)ol/(Fe/Mg)liq ≈ 0.30 (Roeder & Emslie 1970, CMP 29:275; memory): loose ±0.05."""
    ds, models = fo_fa
    bulk = bm.join_bulk(ds, "forsterite", "fayalite", 50.0)
    system, b = _system(ds, bulk, ["olivine", "liquid"], models)
    a = assemblage_properties(equilibrate(system, ONE_BAR, 1800.0, b))
    ol, liq = a.phase("olivine"), a.phase("liquid")
    kd = (ol.endmember_fractions[1] / ol.endmember_fractions[0]) / (
        liq.endmember_fractions[1] / liq.endmember_fractions[0]
    )
    assert kd == pytest.approx(0.30, abs=0.05)


def test_ab_an_an60_liquidus_matches_bowen():
    """D11: An60 liquidus ~1470 °C (Bowen 1913, Am. J. Sci. 35:577; single-source, low weight); ±20 K.

    Ideal molecular liquid and the dataset's plagioclase (no fitted parameter).
    """
    ds = bm.dataset_with_anorthite_liquid_at_observed_melting()
    bulk = bm.join_bulk(ds, "anorthite", "high_albite", 60.0)
    system, b = _system(ds, bulk, ["plagioclase", "liquid"], [bm.albite_anorthite_liquid()])
    liquidus = bm.root_temperature(lambda t: _melt_fraction(system, b, t) - (1 - 1e-9), 1400.0, 1900.0)
    assert liquidus == pytest.approx(1470.0 + 273.15, abs=20.0)


def test_ab_an_first_plagioclase_composition_matches_bowen():
    """D11: first plagioclase from An60 is ~An85 (Bowen 1913; single-source, basis unstated): ±5 mol %."""
    ds = bm.dataset_with_anorthite_liquid_at_observed_melting()
    bulk = bm.join_bulk(ds, "anorthite", "high_albite", 60.0)
    system, b = _system(ds, bulk, ["plagioclase", "liquid"], [bm.albite_anorthite_liquid()])
    liquidus = bm.root_temperature(lambda t: _melt_fraction(system, b, t) - (1 - 1e-9), 1400.0, 1900.0)
    plag = assemblage_properties(equilibrate(system, ONE_BAR, liquidus - 0.2, b)).phase("plagioclase")
    x_an = dict(zip(plag.endmembers, plag.endmember_fractions, strict=True))["anorthite"]
    assert 100 * x_an == pytest.approx(85.0, abs=5.0)
