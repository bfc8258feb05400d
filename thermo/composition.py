"""Bulk compositions: oxide amounts to moles of oxide components.

A composition is given as oxide amounts on an explicit basis (``wt_percent``
or ``mol_percent``). It is normalised to 100 (with a warning when the input
total differs by more than 0.5) and converted to moles of each oxide per
kilogram of material.
"""

from __future__ import annotations

import numbers
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from thermo.elements import molar_mass_g_per_mol, parse_formula
from thermo.errors import CompositionError

#: Oxides heatpath knows by name (formula → the cation it carries).
KNOWN_OXIDES: dict[str, str] = {
    "SiO2": "Si", "TiO2": "Ti", "Al2O3": "Al", "Cr2O3": "Cr", "Fe2O3": "Fe",
    "FeO": "Fe", "MnO": "Mn", "MgO": "Mg", "NiO": "Ni", "CaO": "Ca",
    "Na2O": "Na", "K2O": "K", "P2O5": "P", "H2O": "H",
}
BASES = ("wt_percent", "mol_percent")


@lru_cache(maxsize=128)
def oxide_molar_mass_g_per_mol(oxide: str) -> float:
    """Molar mass [g/mol] of a known oxide (cached: formulas are parsed once)."""
    return molar_mass_g_per_mol(oxide)


@dataclass(frozen=True)
class Bulk:
    """A bulk composition as moles of oxide components per kg.

    Attributes
    ----------
    oxides : tuple[str, ...]
        Oxide component names, in the order of ``mol_per_kg``.
    mol_per_kg : numpy.ndarray
        Moles of each oxide per kilogram of material [mol/kg].
    warnings : list[str]
        Notes produced while reading the input (normalisation, dropped oxides).
    """

    oxides: tuple[str, ...]
    mol_per_kg: np.ndarray
    warnings: list[str] = field(default_factory=list)

    def wt_percent(self) -> dict[str, float]:
        """Oxide mass percentages summing to 100."""
        mass = {ox: n * oxide_molar_mass_g_per_mol(ox) for ox, n in zip(self.oxides, self.mol_per_kg, strict=True)}
        total = sum(mass.values())
        return {ox: 100.0 * m / total for ox, m in mass.items()}

    def mol_percent(self) -> dict[str, float]:
        """Oxide mole percentages summing to 100."""
        total = float(np.sum(self.mol_per_kg))
        return {ox: 100.0 * (n / total) for ox, n in zip(self.oxides, self.mol_per_kg, strict=True)}


def _check_amounts(oxides: Mapping[str, float]) -> None:
    if not isinstance(oxides, Mapping) or not oxides:
        raise CompositionError("composition.oxides", "must be a non-empty mapping of oxide formula to amount")
    for ox, val in oxides.items():
        where = f"composition.oxides.{ox}"
        if ox not in KNOWN_OXIDES:
            raise CompositionError(where, f"unknown oxide {ox!r}; known oxides: {', '.join(KNOWN_OXIDES)}")
        # numbers.Real also admits numpy scalars (np.int64, np.float32), which are not int/float subclasses
        if isinstance(val, bool | np.bool_) or not isinstance(val, numbers.Real) or not np.isfinite(val):
            raise CompositionError(where, "must be a finite number")
        if val < 0:
            raise CompositionError(where, f"must not be negative (got {val})")


def bulk_from_oxides(
    oxides: Mapping[str, float],
    basis: str = "wt_percent",
    supported: tuple[str, ...] | None = None,
    drop_unsupported: bool = False,
) -> Bulk:
    """Convert oxide amounts to a :class:`Bulk` in moles per kg.

    Parameters
    ----------
    oxides : mapping of str to float
        Oxide formula → amount (non-negative) on ``basis``.
    basis : {"wt_percent", "mol_percent"}
        Whether amounts are mass or mole proportions.
    supported : tuple of str, optional
        Oxides the dataset can represent, in component order. Defaults to all
        oxides given.
    drop_unsupported : bool
        If True, oxides outside ``supported`` are removed (with a warning) and
        the rest renormalised; if False they are refused.

    Raises
    ------
    CompositionError
        Negative or non-numeric amounts, unknown or unsupported oxides, a zero
        total, or an unknown basis. The error's ``field`` names the input.
    """
    if basis not in BASES:
        raise CompositionError("composition.basis", f"must be one of {', '.join(BASES)} (got {basis!r})")
    _check_amounts(oxides)
    warnings: list[str] = []
    order = tuple(supported) if supported is not None else tuple(oxides)
    extra = [ox for ox in oxides if ox not in order and oxides[ox] > 0]
    if extra and not drop_unsupported:
        raise CompositionError(
            f"composition.oxides.{extra[0]}",
            f"oxide not represented by the dataset (supported: {', '.join(order)}); "
            "remove it or set drop_unsupported_oxides to true to drop it with a warning",
        )
    if extra:
        warnings.append(f"dropped oxides the dataset cannot represent: {', '.join(extra)}")
    amounts = np.array([float(oxides.get(ox, 0.0)) for ox in order])
    total = amounts.sum()
    if not total > 0.0:
        raise CompositionError("composition.oxides", "total of the supported oxides must be positive")
    if not np.isfinite(total):
        raise CompositionError("composition.oxides", "total of the oxide amounts is too large to represent")
    raw_total = sum(float(v) for v in oxides.values())
    if abs(raw_total - 100.0) > 0.5:
        warnings.append(f"oxide amounts summed to {raw_total:.4g}; normalised to 100 {basis.replace('_', ' ')}")
    masses = np.array([oxide_molar_mass_g_per_mol(ox) for ox in order])
    if basis == "wt_percent":
        mol_per_g = amounts / total / masses
    else:
        mol_per_g = (amounts / total) / float(np.dot(amounts / total, masses))
    return Bulk(oxides=order, mol_per_kg=1000.0 * mol_per_g, warnings=warnings)


def oxide_stoichiometry(formula: str, oxides: tuple[str, ...]) -> np.ndarray:
    """Moles of each oxide component in one formula unit of ``formula``.

    Each cation is assigned to the single oxide in ``oxides`` that carries it;
    the oxygen left over must balance to within 1e-9.

    Raises
    ------
    CompositionError
        If a cation has no oxide in ``oxides`` or oxygen does not balance.
    """
    elements = parse_formula(formula)
    vec = np.zeros(len(oxides))
    oxygen = 0.0
    for el, count in elements.items():
        if el == "O":
            continue
        matches = [i for i, ox in enumerate(oxides) if KNOWN_OXIDES.get(ox) == el]
        if not matches:
            raise CompositionError("formula", f"{formula}: element {el} has no oxide among {', '.join(oxides)}")
        i = matches[0]
        ox_el = parse_formula(oxides[i])
        vec[i] += count / ox_el[el]
        oxygen += count / ox_el[el] * ox_el["O"]
    if abs(oxygen - elements.get("O", 0.0)) > 1e-9:
        raise CompositionError("formula", f"{formula}: oxygen does not balance as oxides {', '.join(oxides)}")
    return vec
