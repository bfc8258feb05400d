"""Atomic weights and chemical formula parsing.

Standard atomic weights: IUPAC Commission on Isotopic Abundances and Atomic
Weights, "Standard atomic weights of the elements 2021" (Prohaska et al. 2022,
Pure Appl. Chem. 94:573-600); conventional values for elements given as
intervals (H, C, N, O, Mg, Si, ...).
"""

from __future__ import annotations

import re

from thermo.errors import InputError

#: Conventional standard atomic weights [g/mol] (IUPAC 2021, see module docstring).
ATOMIC_WEIGHT_G_PER_MOL: dict[str, float] = {
    "H": 1.008,
    "C": 12.011,
    "N": 14.007,
    "O": 15.999,
    "Na": 22.98976928,
    "Mg": 24.305,
    "Al": 26.9815384,
    "Si": 28.085,
    "P": 30.973761998,
    "Cl": 35.45,
    "K": 39.0983,
    "Ca": 40.078,
    "Ti": 47.867,
    "Cr": 51.9961,
    "Mn": 54.938043,
    "Fe": 55.845,
    "Ni": 58.6934,
}

#: An element symbol and an optional count (integer or decimal; a lone "." is not a count).
_TOKEN = re.compile(r"([A-Z][a-z]?)((?:\d+(?:\.\d*)?|\.\d+)?)")


def parse_formula(formula: str) -> dict[str, float]:
    """Parse a plain chemical formula such as ``"Mg2SiO4"`` into element counts.

    Parentheses are not supported (the datasets do not use them).

    Raises
    ------
    InputError
        If the formula is empty, contains characters other than element
        symbols and counts, or names an element without a known atomic weight.
    """
    if not formula or not isinstance(formula, str):
        raise InputError("formula", "must be a non-empty string such as 'Mg2SiO4'")
    counts: dict[str, float] = {}
    pos = 0
    for match in _TOKEN.finditer(formula):
        if match.start() != pos:
            break
        symbol, number = match.groups()
        if symbol not in ATOMIC_WEIGHT_G_PER_MOL:
            raise InputError("formula", f"unknown element {symbol!r} in {formula!r}")
        counts[symbol] = counts.get(symbol, 0.0) + (float(number) if number else 1.0)
        pos = match.end()
    if pos != len(formula) or not counts:
        raise InputError("formula", f"cannot parse {formula!r}: use element symbols and counts, e.g. 'CaMgSi2O6'")
    return counts


def molar_mass_g_per_mol(formula: str) -> float:
    """Molar mass [g/mol] of a formula from IUPAC standard atomic weights."""
    return sum(ATOMIC_WEIGHT_G_PER_MOL[el] * n for el, n in parse_formula(formula).items())
