"""Atomic weights and formula parsing (thermo.elements)."""

from __future__ import annotations

import pytest

from thermo.elements import ATOMIC_WEIGHT_G_PER_MOL, molar_mass_g_per_mol, parse_formula
from thermo.errors import InputError

#: Standard atomic weights [g/mol]: IUPAC Commission on Isotopic Abundances and Atomic Weights,
#: "Standard atomic weights of the elements 2021" (Prohaska et al. 2022, Pure Appl. Chem.
#: 94:573-600); conventional values for elements whose weight is given as an interval.
IUPAC_2021 = {
    "H": 1.008, "C": 12.011, "N": 14.007, "O": 15.999, "Na": 22.98976928, "Mg": 24.305, "Al": 26.9815384,
    "Si": 28.085, "P": 30.973761998, "Cl": 35.45, "K": 39.0983, "Ca": 40.078, "Ti": 47.867, "Cr": 51.9961,
    "Mn": 54.938043, "Fe": 55.845, "Ni": 58.6934,
}  # fmt: skip


def test_atomic_weights_are_iupac_2021_values():
    assert set(ATOMIC_WEIGHT_G_PER_MOL) == set(IUPAC_2021)
    for symbol, weight in IUPAC_2021.items():
        assert ATOMIC_WEIGHT_G_PER_MOL[symbol] == weight, symbol


@pytest.mark.parametrize(
    ("formula", "expected"),
    [
        ("Mg2SiO4", {"Mg": 2.0, "Si": 1.0, "O": 4.0}),
        ("CaMgSi2O6", {"Ca": 1.0, "Mg": 1.0, "Si": 2.0, "O": 6.0}),
        ("NaAlSi3O8", {"Na": 1.0, "Al": 1.0, "Si": 3.0, "O": 8.0}),
        ("Fe0.947O", {"Fe": 0.947, "O": 1.0}),
        ("Fe.5O", {"Fe": 0.5, "O": 1.0}),
        ("HOH", {"H": 2.0, "O": 1.0}),
        ("CO2", {"C": 1.0, "O": 2.0}),
    ],
)
def test_parse_formula_counts_elements(formula, expected):
    assert parse_formula(formula) == expected


@pytest.mark.parametrize(
    ("formula", "grams"),
    [
        # Sums of the IUPAC 2021 weights above, written out by hand.
        ("H2O", 2 * 1.008 + 15.999),
        ("CO2", 12.011 + 2 * 15.999),
        ("Mg2SiO4", 2 * 24.305 + 28.085 + 4 * 15.999),
        ("CaAl2Si2O8", 40.078 + 2 * 26.9815384 + 2 * 28.085 + 8 * 15.999),
        ("NaAlSi3O8", 22.98976928 + 26.9815384 + 3 * 28.085 + 8 * 15.999),
    ],
)
def test_molar_mass_sums_atomic_weights(formula, grams):
    assert molar_mass_g_per_mol(formula) == pytest.approx(grams, rel=1e-14)


def test_molar_masses_match_handbook_values():
    # Water 18.015 and carbon dioxide 44.009 g/mol (CRC Handbook of Chemistry and Physics; memory).
    assert molar_mass_g_per_mol("H2O") == pytest.approx(18.015, abs=0.001)
    assert molar_mass_g_per_mol("CO2") == pytest.approx(44.009, abs=0.001)


@pytest.mark.parametrize(
    "formula",
    ["", None, 123, "mg2SiO4", "Mg2SiO4 ", "Mg.", "Mg2(SiO4)", "Mg2-SiO4", "2MgO", "Xx2O", "Uuo"],
)
def test_bad_formula_is_an_input_error(formula):
    with pytest.raises(InputError) as err:
        parse_formula(formula)
    assert err.value.field == "formula"


def test_unknown_element_is_named():
    with pytest.raises(InputError, match="unknown element 'Xx'"):
        parse_formula("Mg2XxO4")
