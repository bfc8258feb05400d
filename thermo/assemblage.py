"""Properties of an equilibrium assemblage: per phase and per kilogram of system.

Solution phase properties at fixed composition (so they are the "frozen"
properties used for the frozen heat capacity):
G = Σ p_i μ_i; S = Σ p_i S_i° + S_conf + S_ex; H = G + T·S; V = Σ p_i V_i° + V_ex;
Cp = Σ p_i Cp_i° (interaction energies are linear in T, so the excess Cp is 0;
Powell & Holland 1993, Am. Mineral. 78:1174).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.constants import R

from thermo import kernels
from thermo.composition import oxide_molar_mass_g_per_mol
from thermo.minimize import Equilibrium, PhaseState
from thermo.solutions import SolutionModel


@dataclass(frozen=True)
class PhaseProperties:
    """Properties of one phase of an assemblage (molar values per mole of formula units)."""

    name: str
    model: str
    is_liquid: bool
    endmembers: tuple[str, ...]
    endmember_fractions: np.ndarray
    amount_mol: float
    mass_kg: float
    volume_m3: float
    composition_wt_percent: dict[str, float]
    g_j_per_mol: float
    h_j_per_mol: float
    s_j_per_mol_k: float
    v_m3_per_mol: float
    cp_j_per_mol_k: float
    alpha_per_k: float
    molar_mass_kg_per_mol: float

    @property
    def density_kg_per_m3(self) -> float:
        return self.molar_mass_kg_per_mol / self.v_m3_per_mol


@dataclass(frozen=True)
class Assemblage:
    """An equilibrium assemblage with system totals per kilogram."""

    pressure_pa: float
    temperature_k: float
    phases: tuple[PhaseProperties, ...]
    components: tuple[str, ...]
    chemical_potentials_j_per_mol: np.ndarray
    mass_kg: float
    g_j_per_kg: float
    h_j_per_kg: float
    s_j_per_kg_k: float
    v_m3_per_kg: float
    cp_frozen_j_per_kg_k: float
    alpha_frozen_per_k: float
    diagnostics: dict

    @property
    def density_kg_per_m3(self) -> float:
        return 1.0 / self.v_m3_per_kg

    @property
    def melt_fraction(self) -> float:
        """Mass fraction of liquid phases."""
        return sum(p.mass_kg for p in self.phases if p.is_liquid) / self.mass_kg

    def mass_fraction(self, phase: PhaseProperties) -> float:
        return phase.mass_kg / self.mass_kg

    def volume_fraction(self, phase: PhaseProperties) -> float:
        return phase.volume_m3 / (self.v_m3_per_kg * self.mass_kg)

    def phase(self, name: str) -> PhaseProperties | None:
        return next((p for p in self.phases if p.name == name), None)


def _wt_percent(components, moles):
    masses = np.array([oxide_molar_mass_g_per_mol(c) for c in components]) * moles
    total = masses.sum()
    return {c: float(100.0 * m / total) for c, m in zip(components, masses, strict=True) if m > 0}


def _solution_terms(model: SolutionModel, frac: np.ndarray, g0: np.ndarray, t: float, p: float,
                    args: tuple | None = None):
    """G [J/mol], S_conf, S_ex [J/(mol K)] and V_ex [m³/mol] of a solution at composition ``frac``.

    The terms of :mod:`thermo.solutions` through the compiled kernels: G = Σ p_i μ_i,
    S_conf = −R Σ p_i ln a_i(ideal), S_ex = Σ p_i μ_ex,i(W_S), V_ex = Σ p_i μ_ex,i(W_V).
    """
    x = np.ascontiguousarray(frac[None], dtype=float)
    args = args[:8] if args is not None else model.kernel_args(t, p)  # (static, C, has_ex) of the kernels
    static = model.static_kernel_args
    zeros, no_g0 = np.zeros((model.size, model.size)), np.zeros(model.size)
    g = float(frac @ kernels.chemical_potentials(x, *args, np.ascontiguousarray(g0, dtype=float), R * t)[0])
    s_conf = -float(frac @ kernels.chemical_potentials(x, *static, zeros, False, no_g0, R)[0])
    c_s, c_v = model.entropy_volume_kernel_matrices
    s_ex = float(frac @ kernels.chemical_potentials(x, *static, c_s, True, no_g0, 0.0)[0]) if c_s is not None else 0.0
    v_ex = float(frac @ kernels.chemical_potentials(x, *static, c_v, True, no_g0, 0.0)[0]) if c_v is not None else 0.0
    return g, s_conf, s_ex, v_ex


def _phase_properties(eq: Equilibrium, ph: PhaseState) -> PhaseProperties:
    s, std, t, p = eq.system, eq.standard, eq.temperature_k, eq.pressure_pa
    if ph.solution_index < 0:
        k = s.pure_names.index(ph.model)
        idx, stoich, mass = np.array([k]), s.pure_stoich[[k]], s.pure_molar_mass[[k]]
        frac = np.ones(1)
        g = float(std.g_j_per_mol[k])
        s_conf = s_ex = v_ex = 0.0
        names, liquid = (ph.model,), bool(s.pure_is_liquid[k])
    else:
        sp = s.solutions[ph.solution_index]
        idx, stoich, mass = sp.endmember_index, sp.stoich, sp.molar_mass
        frac = ph.amount_mol / ph.amount_mol.sum()
        g, s_conf, s_ex, v_ex = _solution_terms(sp.model, frac, std.g_j_per_mol[idx], t, p,
                                                eq.solution_kernel_args(ph.solution_index))
        names, liquid = sp.model.endmembers, sp.model.is_liquid
    entropy = float(frac @ std.s_j_per_mol_k[idx]) + s_conf + s_ex
    vol = float(frac @ std.v_m3_per_mol[idx]) + v_ex
    n_total = float(ph.amount_mol.sum())
    molar_mass = float(frac @ mass)
    return PhaseProperties(
        name=ph.name, model=ph.model, is_liquid=liquid, endmembers=names, endmember_fractions=frac,
        amount_mol=n_total, mass_kg=n_total * molar_mass, volume_m3=n_total * vol,
        composition_wt_percent=_wt_percent(s.components, frac @ stoich),
        g_j_per_mol=g, h_j_per_mol=g + t * entropy, s_j_per_mol_k=entropy, v_m3_per_mol=vol,
        cp_j_per_mol_k=float(frac @ std.cp_j_per_mol_k[idx]),
        alpha_per_k=float(frac @ (std.alpha_per_k[idx] * std.v_m3_per_mol[idx])) / vol,
        molar_mass_kg_per_mol=molar_mass,
    )


def assemblage_properties(eq: Equilibrium) -> Assemblage:
    """Per-phase and per-kilogram properties of an equilibrium result."""
    phases = tuple(_phase_properties(eq, ph) for ph in eq.phases)
    mass = sum(p.mass_kg for p in phases)

    def total(attr):
        return sum(p.amount_mol * getattr(p, attr) for p in phases) / mass

    v = total("v_m3_per_mol")
    alpha = sum(p.amount_mol * p.v_m3_per_mol * p.alpha_per_k for p in phases) / mass / v
    return Assemblage(
        pressure_pa=eq.pressure_pa, temperature_k=eq.temperature_k, phases=phases,
        components=eq.system.components, chemical_potentials_j_per_mol=eq.mu.copy(), mass_kg=mass,
        g_j_per_kg=total("g_j_per_mol"), h_j_per_kg=total("h_j_per_mol"), s_j_per_kg_k=total("s_j_per_mol_k"),
        v_m3_per_kg=v, cp_frozen_j_per_kg_k=total("cp_j_per_mol_k"), alpha_frozen_per_k=alpha,
        diagnostics=dict(eq.diagnostics),
    )
