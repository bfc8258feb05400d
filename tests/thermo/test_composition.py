"""Bulk compositions: oxide amounts to mol/kg (thermo.composition)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from thermo.composition import bulk_from_oxides, oxide_molar_mass_g_per_mol, oxide_stoichiometry
from thermo.errors import CompositionError, InputError

NCFMAS = ("SiO2", "Al2O3", "FeO", "MgO", "CaO", "Na2O")
# Standard atomic weights, IUPAC 2021 (Prohaska et al. 2022, Pure Appl. Chem. 94:573), conventional values.
M_MGO = 24.305 + 15.999
M_SIO2 = 28.085 + 2 * 15.999
M_FORSTERITE = 2 * M_MGO + M_SIO2
# KLB-1 peridotite, NCFMAS oxides only (checks.csv C04: Davis et al. 2009, Am. Mineral. 94:176; memory).
KLB1_NCFMAS_WT = {"SiO2": 44.48, "Al2O3": 3.59, "FeO": 8.10, "MgO": 39.22, "CaO": 3.44, "Na2O": 0.30}


def _mass_g(bulk) -> float:
    return sum(n * oxide_molar_mass_g_per_mol(ox) for ox, n in zip(bulk.oxides, bulk.mol_per_kg, strict=True))


def test_forsterite_in_wt_percent_gives_two_mgo_per_sio2():
    wt = {"MgO": 100.0 * 2 * M_MGO / M_FORSTERITE, "SiO2": 100.0 * M_SIO2 / M_FORSTERITE}
    bulk = bulk_from_oxides(wt, basis="wt_percent")
    mol = dict(zip(bulk.oxides, bulk.mol_per_kg, strict=True))
    assert mol["SiO2"] == pytest.approx(1000.0 / M_FORSTERITE, rel=1e-12)
    assert mol["MgO"] == pytest.approx(2.0 * mol["SiO2"], rel=1e-12)
    assert bulk.warnings == []


def test_forsterite_in_mol_percent_gives_the_same_mol_per_kg():
    bulk = bulk_from_oxides({"MgO": 200.0 / 3.0, "SiO2": 100.0 / 3.0}, basis="mol_percent")
    mol = dict(zip(bulk.oxides, bulk.mol_per_kg, strict=True))
    assert mol["SiO2"] == pytest.approx(1000.0 / M_FORSTERITE, rel=1e-12)
    assert mol["MgO"] == pytest.approx(2000.0 / M_FORSTERITE, rel=1e-12)


@pytest.mark.parametrize("basis", ["wt_percent", "mol_percent"])
def test_round_trip_returns_normalised_input_and_one_kilogram(basis):
    bulk = bulk_from_oxides(KLB1_NCFMAS_WT, basis=basis, supported=NCFMAS)
    total = sum(KLB1_NCFMAS_WT.values())
    back = bulk.wt_percent() if basis == "wt_percent" else bulk.mol_percent()
    for ox, value in KLB1_NCFMAS_WT.items():
        assert back[ox] == pytest.approx(100.0 * value / total, rel=1e-12)
    assert _mass_g(bulk) == pytest.approx(1000.0, rel=1e-12)
    assert sum(bulk.wt_percent().values()) == pytest.approx(100.0, rel=1e-12)
    assert sum(bulk.mol_percent().values()) == pytest.approx(100.0, rel=1e-12)


def test_wt_and_mol_percent_are_consistent_conversions():
    by_wt = bulk_from_oxides(KLB1_NCFMAS_WT, basis="wt_percent", supported=NCFMAS)
    by_mol = bulk_from_oxides(by_wt.mol_percent(), basis="mol_percent", supported=NCFMAS)
    np.testing.assert_allclose(by_mol.mol_per_kg, by_wt.mol_per_kg, rtol=1e-12)


def test_normalisation_warns_only_beyond_half_a_percent():
    assert bulk_from_oxides({"SiO2": 60.0, "MgO": 39.6}).warnings == []
    off = bulk_from_oxides(KLB1_NCFMAS_WT)  # sums to 99.13
    assert len(off.warnings) == 1 and "99.13" in off.warnings[0] and "normalised" in off.warnings[0]


def test_output_follows_supported_order_with_zeros_for_absent_oxides():
    bulk = bulk_from_oxides({"MgO": 50.0, "SiO2": 50.0}, supported=NCFMAS)
    assert bulk.oxides == NCFMAS
    assert bulk.mol_per_kg[NCFMAS.index("Al2O3")] == 0.0
    assert bulk.mol_per_kg[NCFMAS.index("MgO")] > 0.0


def test_numpy_scalars_are_accepted():
    plain = bulk_from_oxides({"SiO2": 50.0, "MgO": 50.0})
    numpy = bulk_from_oxides({"SiO2": np.int64(50), "MgO": np.float32(50.0)})
    np.testing.assert_allclose(numpy.mol_per_kg, plain.mol_per_kg, rtol=1e-12)


BAD_INPUT = [
    pytest.param({"SiO2": -1.0, "MgO": 50.0}, {}, "composition.oxides.SiO2", "negative", id="negative"),
    pytest.param({"SiO2": 50.0, "XO2": 5.0}, {}, "composition.oxides.XO2", "unknown oxide", id="unknown-oxide"),
    pytest.param({}, {}, "composition.oxides", "non-empty", id="empty"),
    pytest.param({"SiO2": 0.0, "MgO": 0.0}, {}, "composition.oxides", "positive", id="zero-total"),
    pytest.param({"SiO2": "45.1"}, {}, "composition.oxides.SiO2", "number", id="string"),
    pytest.param({"SiO2": None}, {}, "composition.oxides.SiO2", "number", id="none"),
    pytest.param({"SiO2": True}, {}, "composition.oxides.SiO2", "number", id="bool"),
    pytest.param({"SiO2": math.nan}, {}, "composition.oxides.SiO2", "finite", id="nan"),
    pytest.param({"SiO2": math.inf}, {}, "composition.oxides.SiO2", "finite", id="inf"),
    pytest.param({"SiO2": 50.0, "K2O": 5.0}, {"supported": NCFMAS}, "composition.oxides.K2O", "not represented",
                 id="unsupported-oxide"),
    pytest.param({"K2O": 5.0}, {"supported": NCFMAS, "drop_unsupported": True}, "composition.oxides", "positive",
                 id="only-unsupported-dropped"),
    pytest.param({"SiO2": 50.0}, {"basis": "ppm"}, "composition.basis", "wt_percent", id="unknown-basis"),
    pytest.param(["SiO2", 50.0], {}, "composition.oxides", "mapping", id="not-a-mapping"),
]


@pytest.mark.parametrize(("oxides", "options", "field", "words"), BAD_INPUT)
def test_bad_input_is_refused_naming_the_field(oxides, options, field, words):
    with pytest.raises(CompositionError) as err:
        bulk_from_oxides(oxides, **options)
    assert err.value.field == field
    assert words in err.value.message
    assert isinstance(err.value, InputError) and isinstance(err.value, ValueError)


def test_unsupported_oxide_dropped_with_a_warning_when_allowed():
    oxides = {"SiO2": 50.0, "MgO": 45.0, "K2O": 5.0}
    bulk = bulk_from_oxides(oxides, supported=NCFMAS, drop_unsupported=True)
    assert bulk.oxides == NCFMAS
    assert any("K2O" in w and "dropped" in w for w in bulk.warnings)
    assert bulk.wt_percent()["SiO2"] == pytest.approx(100.0 * 50.0 / 95.0, rel=1e-12)


def test_oxide_stoichiometry_of_formulas():
    np.testing.assert_array_equal(oxide_stoichiometry("CaMgSi2O6", NCFMAS), [2, 0, 0, 1, 1, 0])
    np.testing.assert_array_equal(oxide_stoichiometry("NaAlSi3O8", NCFMAS), [3, 0.5, 0, 0, 0, 0.5])
    np.testing.assert_array_equal(oxide_stoichiometry("Fe2SiO4", NCFMAS), [1, 0, 2, 0, 0, 0])


def test_oxide_stoichiometry_refuses_missing_cation_and_unbalanced_oxygen():
    with pytest.raises(CompositionError, match="K has no oxide"):
        oxide_stoichiometry("KAlSi3O8", NCFMAS)
    with pytest.raises(CompositionError, match="oxygen does not balance"):
        oxide_stoichiometry("Mg2SiO5", NCFMAS)
