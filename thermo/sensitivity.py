"""Temperature derivatives of an equilibrium on its own branch, by implicit differentiation.

At a polished equilibrium with a given assemblage the conditions are r(z, T) = 0 with
z = (endmember amounts n of every phase, reduced chemical potentials μ_r):
μ_i(phase) − a_i·μ = 0 for every endmember and Bᵀ(Σ a n − b) = 0 (mass balance on the span B of
the phases' compositions). Differentiating at fixed P and bulk (implicit-function theorem):
J·dz/dT = −∂r/∂T with ∂r_i/∂T = ∂μ_i/∂T|n = −S̄_i, the partial molar entropy, and J the
Jacobian the minimizer's Newton polish uses. With ṅ = dn/dT, standard identities give
(e.g. Callen 1985, Thermodynamics and an Introduction to Thermostatistics, ch. 3 and 8):

* dH/dT = C_frozen + Σ_i H̄_i ṅ_i = C_frozen + T Σ_i S̄_i ṅ_i (Σ μ_i ṅ_i = μ·Σ a_i ṅ_i = 0),
  the effective heat capacity, latent heat included; dS/dT = (dH/dT)/T;
* dV/dT = Σ_i n_i V°_i α_i + Σ_i V̄_i ṅ_i, and dφ/dT = Σ_liquid M_i ṅ_i / M.

Partial molar entropy and volume of endmember i of a solution (Holland & Powell 2003, Contrib.
Mineral. Petrol. 145:492, with W = W_H − T·W_S + P·W_V): S̄_i = S°_i − R ln a_i(ideal) + μ_ex,i(W_S)
and V̄_i = V°_i + μ_ex,i(W_V), μ_ex(W) the van Laar excess chemical potential for the matrix W.

Second derivatives (the slopes of C_frozen and of dH/dT along the branch) are central differences
of these exact first derivatives at the predicted states T ± δ, amounts n_i·exp(±δ ṅ_i/n_i): the
prediction's error is even in δ and cancels in the central difference, leaving O(δ²).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy.constants import R

from thermo import kernels
from thermo.endmembers import StandardState, standard_state
from thermo.minimize import Equilibrium, PhaseState, _kernel_args, assemblage_basis

#: Endmembers below this fraction of their phase are frozen (no derivative), as in the polish.
_FROZEN = 1e-30


class SingularBranch(ArithmeticError):  # noqa: N818 - a condition, not a failure to report
    """No two-sided branch derivative here: singular conditions (an invariant point) or a boundary within δ."""


@dataclass(frozen=True)
class BranchRates:
    """First temperature derivatives of an equilibrium on its branch (extensive: J/K, J/K², m³/K, kg/K)."""

    heat_capacity_frozen_j_per_k: float  # Σ n_i Cp°_i
    heat_capacity_effective_j_per_k: float  # dH/dT
    volume_rate_m3_per_k: float  # dV/dT
    melt_mass_rate_kg_per_k: float  # d(liquid mass)/dT
    amount_rates: tuple[np.ndarray, ...]  # dn/dT per phase [mol/K]
    mu_rate: np.ndarray  # dμ/dT of the components [J/(mol K)] (the part the assemblage fixes)


def _partial_molar(eq: Equilibrium, ph: PhaseState, std: StandardState, t: float, p: float):
    """S̄ [J/(mol K)], V̄ [m³/mol], Cp° [J/(mol K)], V°α [m³/(mol K)], molar mass [kg/mol] of a phase's endmembers."""
    s = eq.system
    if ph.solution_index < 0:
        k = s.pure_names.index(ph.model)
        return (std.s_j_per_mol_k[[k]], std.v_m3_per_mol[[k]], std.cp_j_per_mol_k[[k]],
                std.v_m3_per_mol[[k]] * std.alpha_per_k[[k]], s.pure_molar_mass[[k]])
    sp = s.solutions[ph.solution_index]
    idx, model = sp.endmember_index, sp.model
    x = np.ascontiguousarray(ph.amount_mol[None], dtype=float)
    static = model.static_kernel_args
    zeros, no_g0 = np.zeros((model.size, model.size)), np.zeros(model.size)
    r_ln_a = kernels.chemical_potentials(x, *static, zeros, False, no_g0, R)[0]  # R ln a_i (ideal)
    s_bar = std.s_j_per_mol_k[idx] - r_ln_a
    v_bar = std.v_m3_per_mol[idx]
    c_s, c_v = model.entropy_volume_kernel_matrices
    if c_s is not None:
        s_bar = s_bar + kernels.chemical_potentials(x, *static, c_s, True, no_g0, 0.0)[0]
    if c_v is not None:
        v_bar = v_bar + kernels.chemical_potentials(x, *static, c_v, True, no_g0, 0.0)[0]
    return (s_bar, v_bar, std.cp_j_per_mol_k[idx], std.v_m3_per_mol[idx] * std.alpha_per_k[idx], sp.molar_mass)


def branch_rates(eq: Equilibrium, phases: list[PhaseState] | None = None, std: StandardState | None = None,
                 temperature_k: float | None = None) -> BranchRates:
    """dH/dT, dV/dT, d(melt mass)/dT and dn/dT of ``eq``'s assemblage (or of ``phases`` at ``temperature_k``).

    Raises :class:`SingularBranch` if the linearized equilibrium conditions are singular.
    """
    phases = eq.phases if phases is None else phases
    t = eq.temperature_k if temperature_k is None else temperature_k
    std = eq.standard if std is None else std
    s, p = eq.system, eq.pressure_pa
    stoich = [s.pure_stoich[[s.pure_names.index(ph.model)]] if ph.solution_index < 0
              else s.solutions[ph.solution_index].stoich for ph in phases]
    basis = assemblage_basis(s, phases)
    sizes = [len(ph.amount_mol) for ph in phases]
    offs = np.concatenate([[0], np.cumsum(sizes)]).astype(int)
    nv, c = int(offs[-1]), basis.shape[1]
    jac = np.zeros((nv + c, nv + c))
    rhs = np.zeros(nv + c)
    amounts = np.concatenate([ph.amount_mol for ph in phases])
    scale = np.ones(nv)  # solution variables are d ln n (columns times n), pure ones dn
    live = np.ones(nv + c, bool)
    parts = []
    for j, ph in enumerate(phases):
        sl = slice(offs[j], offs[j + 1])
        part = _partial_molar(eq, ph, std, t, p)
        parts.append(part)
        ab = stoich[j] @ basis
        rhs[sl] = part[0]  # J dz = −∂r/∂T = S̄
        jac[sl, nv:] = -ab
        jac[nv:, sl] = ab.T
        if ph.solution_index >= 0:
            sp = s.solutions[ph.solution_index]
            kargs = (eq.solution_kernel_args(ph.solution_index) if std is eq.standard
                     else _kernel_args(sp, std.g_j_per_mol[sp.endmember_index], t, p))
            _, h = kernels.chemical_potentials_jacobian(np.ascontiguousarray(ph.amount_mol[None], float), *kargs)
            jac[sl, sl] = h[0]
            scale[sl] = ph.amount_mol
            live[sl] = ph.amount_mol >= _FROZEN * ph.amount_mol.sum()
    jac[:, :nv] *= scale
    rows = np.flatnonzero(live)
    dz = np.zeros(nv + c)
    try:
        dz[rows] = np.linalg.solve(jac[np.ix_(rows, rows)] if rows.size < nv + c else jac, rhs[rows])
    except np.linalg.LinAlgError:
        raise SingularBranch(f"singular equilibrium conditions at T = {t:.6f} K") from None
    if not np.all(np.isfinite(dz)):
        raise SingularBranch(f"non-finite branch derivative at T = {t:.6f} K")
    ndot = dz[:nv] * scale
    c_frozen = h_rate = v_rate = melt_rate = 0.0
    for j, ph in enumerate(phases):
        sl = slice(offs[j], offs[j + 1])
        s_bar, v_bar, cp0, va, molar_mass = parts[j]
        n, nd = amounts[sl], ndot[sl]
        c_frozen += float(n @ cp0)
        h_rate += t * float(s_bar @ nd)
        v_rate += float(n @ va + v_bar @ nd)
        liquid = (s.pure_is_liquid[s.pure_names.index(ph.model)] if ph.solution_index < 0
                  else s.solutions[ph.solution_index].model.is_liquid)
        if liquid:
            melt_rate += float(molar_mass @ nd)
    return BranchRates(c_frozen, c_frozen + h_rate, v_rate, melt_rate,
                       tuple(ndot[offs[j]: offs[j + 1]] for j in range(len(phases))), basis @ dz[nv:])


def predict(eq: Equilibrium, rates: BranchRates, temperature_k: float) -> Equilibrium:
    """First-order prediction of ``eq``'s branch at another temperature (a warm start, not an answer).

    Solution endmembers move as n·exp(ΔT ṅ/n) (they stay positive), pure phases as n + ΔT ṅ (kept
    above a thousandth of their amount: the polish decides whether they vanish), μ as μ + ΔT dμ/dT.
    """
    dt = temperature_k - eq.temperature_k
    phases = []
    for ph, nd in zip(eq.phases, rates.amount_rates, strict=True):
        n = ph.amount_mol
        if ph.solution_index >= 0:
            live = n >= _FROZEN * n.sum()
            rel = np.where(live, nd / np.where(live, n, 1.0), 0.0)
            amt = n * np.exp(np.clip(dt * rel, -2.0, 2.0))
        else:
            amt = np.maximum(n + dt * nd, 1e-3 * n)
        phases.append(PhaseState(ph.name, ph.model, ph.solution_index, amt))
    return replace(eq, phases=phases, mu=eq.mu + dt * rates.mu_rate, temperature_k=temperature_k)


def branch_slopes(eq: Equilibrium, rates: BranchRates, delta_k: float, effective: bool = True,
                  neighbours: StandardState | None = None) -> tuple[float, float]:
    """d(C_frozen)/dT and d²H/dT² [J/K²] on the branch, central differences of exact rates at T ± δ.

    d(C_frozen)/dT = Σ n_i dCp°_i/dT + Σ Cp°_i ṅ_i, with dCp°/dT a central difference of the standard
    state (``neighbours``: the standard states at T − δ and T + δ, if the caller has them). d²H/dT² (only if
    ``effective``; NaN otherwise) is the central difference of the exact dH/dT
    at the predicted states. Raises :class:`SingularBranch` when a phase's amount would change by more
    than 10 % over δ (a boundary close by: one-sided differences of converged states are the answer there).
    """
    t = eq.temperature_k
    # a phase about to vanish (n → 0 at a boundary within a few δ) changes fast in ln n; the branch
    # does not extend to both sides, and a central difference over a shrunken δ drowns in round-off
    fastest = 0.0
    for ph, nd in zip(eq.phases, rates.amount_rates, strict=True):
        if ph.solution_index >= 0:
            live = ph.amount_mol >= _FROZEN * ph.amount_mol.sum()
            if live.any():
                fastest = max(fastest, float(np.max(np.abs(nd[live] / ph.amount_mol[live]))))
    if fastest * delta_k > 0.1:
        raise SingularBranch(f"a phase vanishes within {0.1 / fastest:.3g} K of T = {t:.6f} K")
    std2 = neighbours if neighbours is not None else standard_state(
        eq.system.params, eq.pressure_pa, np.array([t - delta_k, t + delta_k]))
    dcp_dt = (std2.cp_j_per_mol_k[1] - std2.cp_j_per_mol_k[0]) / (2.0 * delta_k)
    s = eq.system
    frozen_slope = 0.0
    for ph, nd in zip(eq.phases, rates.amount_rates, strict=True):
        idx = ([s.pure_names.index(ph.model)] if ph.solution_index < 0
               else s.solutions[ph.solution_index].endmember_index)
        frozen_slope += float(ph.amount_mol @ dcp_dt[idx] + nd @ eq.standard.cp_j_per_mol_k[idx])
    if not effective:
        return frozen_slope, float("nan")
    out = []
    for k, sign in enumerate((-1.0, 1.0)):
        std = StandardState(*(getattr(std2, f)[k] for f in StandardState.__dataclass_fields__))
        moved = []
        for ph, nd in zip(eq.phases, rates.amount_rates, strict=True):
            if ph.solution_index >= 0:
                live = ph.amount_mol >= _FROZEN * ph.amount_mol.sum()
                rel = np.where(live, nd / np.where(live, ph.amount_mol, 1.0), 0.0)
                amt = ph.amount_mol * np.exp(sign * delta_k * rel)
            else:
                amt = ph.amount_mol + sign * delta_k * nd
            moved.append(PhaseState(ph.name, ph.model, ph.solution_index, amt))
        out.append(branch_rates(eq, moved, std, t + sign * delta_k))
    return frozen_slope, (out[1].heat_capacity_effective_j_per_k - out[0].heat_capacity_effective_j_per_k) / (
        2.0 * delta_k)
