"""Converged states along a path and their exact energetics.

A :class:`State` is one fully converged equilibrium (minimizer result plus
assemblage properties). On top of it this module computes

* the effective heat capacity cp_eff = dh/dT of the equilibrium path at fixed
  bulk composition, the effective expansivity (1/v) dv/dT and dφ/dT, by finite
  differences of fully converged states at T ± δ with δ small (default
  0.02 K), not from the coarse step of a path. Where a phase boundary lies
  within δ the one-sided second-order stencil on the side of the state's own
  assemblage is used;
* the heat released over a step of a path at fixed bulk composition, split
  into its sensible part ∫cp_frozen dT (composite Simpson rule on converged
  sub-step states) and its latent part (the rest), and ∫T ds over the step
  by integration by parts, ∫T ds = [T s] − ∫s dT, so that the identity
  dh = T ds (fixed P and bulk) can be tested on converged states only.

All specific quantities are per kilogram of the bulk that was equilibrated;
extensive ones (suffix ``_j`` or ``_j_per_k``) are for the amount of bulk
equilibrated (``State.mass_kg``).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from thermo.assemblage import Assemblage, assemblage_properties
from thermo.composition import Bulk, oxide_molar_mass_g_per_mol
from thermo.endmembers import StandardState, standard_state
from thermo.equilibrium import Problem
from thermo.errors import ConvergenceError
from thermo.minimize import Equilibrium, SolverOptions, equilibrate
from thermo.phases import PhaseSystem, build_system
from thermo.sensitivity import BranchRates, SingularBranch, branch_rates, branch_slopes

#: Phases below this mass fraction do not count as present in a state's signature.
PRESENT_MASS_FRACTION = 1e-12
#: Components below this fraction of the largest are treated as absent when a parcel is rebuilt.
VANISHING_COMPONENT = 1e-13


@dataclass(frozen=True)
class State:
    """A converged equilibrium at one (P, T) and its properties."""

    eq: Equilibrium
    props: Assemblage
    # standard states at T − δ and T + δ (arrays (2, n)) and δ [K], when the caller asked for them
    neighbours: tuple[StandardState, float] | None = None

    @property
    def temperature_k(self) -> float:
        return self.eq.temperature_k

    @property
    def pressure_pa(self) -> float:
        return self.eq.pressure_pa

    @property
    def signature(self) -> tuple[str, ...]:
        """Sorted names of the phases present (instances of one solution keep their '#n' suffix)."""
        m = self.props.mass_kg
        return tuple(sorted(p.name for p in self.props.phases if p.mass_kg > PRESENT_MASS_FRACTION * m))

    @property
    def mass_kg(self) -> float:
        return self.props.mass_kg

    @property
    def enthalpy_j(self) -> float:
        """Enthalpy of the equilibrated bulk [J] (dataset element reference)."""
        return self.props.h_j_per_kg * self.props.mass_kg

    @property
    def entropy_j_per_k(self) -> float:
        return self.props.s_j_per_kg_k * self.props.mass_kg

    @property
    def heat_capacity_frozen_j_per_k(self) -> float:
        return self.props.cp_frozen_j_per_kg_k * self.props.mass_kg


def solve_state(
    problem: Problem,
    pressure_pa: float,
    temperature_k: float,
    warm: State | None = None,
    options: SolverOptions | None = None,
    verify: bool = True,
    neighbour_step_k: float | None = None,
) -> State:
    """Equilibrium of ``problem``'s bulk at (P [Pa], T [K]), warm-started from ``warm`` when it fits.

    With ``neighbour_step_k`` = δ the standard states at T ± δ come along (one vectorized
    evaluation with T's own), for the branch slopes of :func:`path_derivatives`.
    No validity-domain check (callers check their requested range once).
    Raises :class:`ConvergenceError` or :class:`CompositionError` from the minimizer.
    """
    w = warm.eq if warm is not None and warm.eq.system is problem.system else None
    standard, neighbours = None, None
    if neighbour_step_k is not None:
        d = float(neighbour_step_k)
        three = standard_state(problem.system.params, pressure_pa,
                               np.array([temperature_k, temperature_k - d, temperature_k + d]))
        fields = StandardState.__dataclass_fields__
        standard = StandardState(*(getattr(three, f)[0] for f in fields))
        neighbours = (StandardState(*(getattr(three, f)[1:] for f in fields)), d)
    eq = equilibrate(problem.system, pressure_pa, temperature_k, problem.bulk_mol, warm=w, options=options,
                     verify=verify, standard=standard)
    return State(eq, assemblage_properties(eq), neighbours)


def oxide_mass_kg(oxides: tuple[str, ...], mol) -> float:
    """Mass [kg] of ``mol`` moles of the given oxides."""
    return float(np.dot(np.asarray(mol, float), [oxide_molar_mass_g_per_mol(o) for o in oxides])) / 1000.0


def rebuild_system(problem: Problem, bulk_mol_all) -> PhaseSystem:
    """The problem's candidate phases rebuilt for a bulk whose active components differ."""
    sols = [sp.model for sp in problem.system.solutions]
    names = [m.name for m in sols] + list(problem.system.pure_names)
    return build_system(problem.dataset, bulk_mol_all, phases=names, extra_models=sols)


def parcel_problem(problem: Problem, bulk_mol_all) -> tuple[Problem, float]:
    """A problem for a new bulk (moles of every dataset oxide, any scale), normalised to 1 kg.

    Components that vanish (below ``VANISHING_COMPONENT`` of the largest) are set to
    zero; the phase system is rebuilt only when the set of active components changes,
    so warm starts survive otherwise.

    Returns
    -------
    problem : Problem
        Same dataset and candidate phases, bulk in mol per kg.
    mass_kg : float
        Mass of ``bulk_mol_all`` [kg].
    """
    bulk = np.asarray(bulk_mol_all, float)
    bulk = np.where(bulk > VANISHING_COMPONENT * bulk.max(), bulk, 0.0)
    oxides = problem.dataset.oxides
    mass = oxide_mass_kg(oxides, bulk)
    per_kg = bulk / mass
    same = np.array_equal(np.flatnonzero(per_kg > 0), problem.system.component_index)
    system = problem.system if same else rebuild_system(problem, per_kg)
    return Problem(problem.dataset, Bulk(oxides, per_kg, []), system), mass


def phase_oxide_mol(eq: Equilibrium, name: str, n_oxides: int) -> np.ndarray:
    """Moles of every dataset oxide in the phase ``name`` of an equilibrium."""
    s = eq.system
    ph = next(p for p in eq.phases if p.name == name)
    if ph.solution_index < 0:
        active = s.pure_stoich[s.pure_names.index(ph.model)] * ph.amount_mol[0]
    else:
        active = s.solutions[ph.solution_index].stoich.T @ ph.amount_mol
    out = np.zeros(n_oxides)
    out[s.component_index] = active
    return out


# ------------------------------------------------------------- derivatives
_STENCILS = {  # offsets (in units of δ), weights of d/dT·δ and of d²/dT²·δ²
    "central": ((-1, 0, 1), (-0.5, 0.0, 0.5), (1.0, -2.0, 1.0)),
    "backward": ((0, -1, -2), (1.5, -2.0, 0.5), (1.0, -2.0, 1.0)),
    "forward": ((0, 1, 2), (-1.5, 2.0, -0.5), (1.0, -2.0, 1.0)),
}


@dataclass(frozen=True)
class Derivatives:
    """Temperature derivatives along the isobaric equilibrium path at fixed bulk composition."""

    cp_effective_j_per_kg_k: float  # dh/dT (latent heat folded in)
    ds_dt_j_per_kg_k2: float
    cp_frozen_slope_j_per_kg_k2: float  # d(cp_frozen)/dT along the path
    cp_effective_slope_j_per_kg_k2: float  # d(cp_eff)/dT = d²h/dT² (first-order accurate one-sided)
    alpha_effective_per_k: float  # (1/v) dv/dT
    melt_fraction_derivative_per_k: float  # dφ/dT
    stencil: str
    delta_k: float
    rates: BranchRates | None = field(default=None, compare=False, repr=False)  # exact branch rates, if analytic


def path_derivatives(problem: Problem, state: State, delta_k: float = 0.02,
                     effective_slope: bool = True) -> Derivatives:
    """Effective (equilibrium-path) derivatives at a state, on the state's own branch.

    First derivatives (dh/dT, ds/dT, dv/dT, dφ/dT) are exact, by implicit differentiation of the
    equilibrium conditions (:mod:`thermo.sensitivity`); the slopes of cp_frozen and cp_eff are
    central differences of exact first derivatives at predicted states T ± δ (stencil
    ``"analytic"``). Where the linearized conditions are singular, finite differences of
    converged states are used instead: central differences f'(T) ≈ [f(T+δ) − f(T−δ)]/(2δ) when
    T ± δ carry the state's own assemblage; otherwise the second-order one-sided stencil
    [∓3f(T) ± 4f(T±δ) ∓ f(T±2δ)]/(2δ) on the side that does (standard finite-difference
    formulas, e.g. Fornberg 1988, Math. Comput. 51:699), δ divided by 10 (twice at most) when
    phase boundaries lie within δ on both sides.

    Parameters
    ----------
    problem : Problem
        The bulk the state was computed for.
    state : State
    delta_k : float
        Difference step δ [K].
    effective_slope : bool
        Also d(cp_eff)/dT (tables need it; paths do not: NaN when False and the derivatives are exact).

    Raises
    ------
    ConvergenceError
        If the finite-difference fallback finds phase boundaries within δ/100 on both sides.
    """
    try:
        return _analytic_derivatives(state, delta_k, effective_slope)
    except SingularBranch:
        pass
    for delta in (delta_k, delta_k / 10.0, delta_k / 100.0):
        found = _derivatives_with_step(problem, state, delta)
        if found is not None:
            return found
    raise ConvergenceError(
        f"phase boundaries within {delta_k / 100.0} K on both sides of T = {state.temperature_k:.6f} K",
        {"temperature_k": state.temperature_k, "delta_k": delta_k},
    )


def _analytic_derivatives(state: State, delta_k: float, effective_slope: bool = True) -> Derivatives:
    rates = branch_rates(state.eq)
    neighbours = state.neighbours if state.neighbours is not None and state.neighbours[1] == delta_k else None
    cf_slope, ce_slope = branch_slopes(state.eq, rates, delta_k, effective_slope,
                                       neighbours[0] if neighbours else None)
    m, t = state.mass_kg, state.temperature_k
    cp_eff = rates.heat_capacity_effective_j_per_k / m
    return Derivatives(
        cp_effective_j_per_kg_k=cp_eff,
        ds_dt_j_per_kg_k2=cp_eff / t,
        cp_frozen_slope_j_per_kg_k2=cf_slope / m,
        cp_effective_slope_j_per_kg_k2=ce_slope / m,
        alpha_effective_per_k=rates.volume_rate_m3_per_k / m / state.props.v_m3_per_kg,
        melt_fraction_derivative_per_k=rates.melt_mass_rate_kg_per_k / m,
        stencil="analytic", delta_k=delta_k, rates=rates,
    )


def _derivatives_with_step(problem: Problem, state: State, delta_k: float) -> Derivatives | None:
    cache = {0: state}

    def at(k: int) -> State:
        if k not in cache:
            # the state's own branch (assemblage held, re-polished): its derivative is the path's on this side
            cache[k] = solve_state(problem, state.pressure_pa, state.temperature_k + k * delta_k, warm=state,
                                   verify=False)
        return cache[k]

    for name, (offsets, weights, weights2) in _STENCILS.items():
        if all(at(k).signature == state.signature for k in offsets):
            pts = [at(k).props for k in offsets]

            def d(f, pts=pts, weights=weights):
                return sum(w * f(p) for w, p in zip(weights, pts, strict=True)) / delta_k

            def d2(f, pts=pts, weights=weights2):
                return sum(w * f(p) for w, p in zip(weights, pts, strict=True)) / delta_k**2

            return Derivatives(
                cp_effective_j_per_kg_k=d(lambda p: p.h_j_per_kg),
                ds_dt_j_per_kg_k2=d(lambda p: p.s_j_per_kg_k),
                cp_frozen_slope_j_per_kg_k2=d(lambda p: p.cp_frozen_j_per_kg_k),
                cp_effective_slope_j_per_kg_k2=d2(lambda p: p.h_j_per_kg),
                alpha_effective_per_k=d(lambda p: p.v_m3_per_kg) / state.props.v_m3_per_kg,
                melt_fraction_derivative_per_k=d(lambda p: p.melt_fraction),
                stencil=name, delta_k=delta_k,
            )
    return None


# ---------------------------------------------------------- step integrals
@dataclass(frozen=True)
class StepIntegral:
    """Energetics of cooling one equilibrated bulk from ``upper`` to ``lower`` (extensive, [J], [J/K])."""

    heat_released_j: float  # H(upper) − H(lower)
    sensible_heat_j: float  # ∫ C_frozen dT over the step
    latent_heat_j: float  # heat_released − sensible = ∫ (C_eff − C_frozen) dT
    entropy_change_j_per_k: float  # S(lower) − S(upper) (negative on cooling)
    t_ds_j: float  # ∫ T dS from lower to upper (equals heat_released at equilibrium)
    quadrature_error_j: float  # |Simpson − trapezoid| of the sensible part (an upper error estimate)
    nodes: int


def _simpson_weights(n_intervals: int) -> np.ndarray:
    w = np.ones(n_intervals + 1)
    w[1:-1:2], w[2:-1:2] = 4.0, 2.0
    return w / 3.0


def step_nodes(problem: Problem, upper: State, lower: State, n_sub: int, min_width_k: float) -> list[State]:
    """States at n_sub equal sub-steps between two states (only the endpoints for narrow steps)."""
    width = upper.temperature_k - lower.temperature_k
    if width < min_width_k or n_sub < 2:
        return [lower, upper]
    nodes, warm = [lower], lower
    for t in np.linspace(lower.temperature_k, upper.temperature_k, n_sub + 1)[1:-1]:
        warm = solve_state(problem, lower.pressure_pa, float(t), warm=warm)
        nodes.append(warm)
    return [*nodes, upper]


def integrate_step(
    problem: Problem, upper: State, lower: State, n_sub: int = 2, min_width_k: float = 1e-3
) -> StepIntegral:
    """Heat released, its sensible and latent parts and ∫T dS over one step at fixed bulk.

    The sensible part ∫C_frozen dT and ∫S dT use the composite Simpson rule on
    ``n_sub`` (even) equal sub-steps of converged states; steps narrower than
    ``min_width_k`` (the two sides of a phase boundary) use the trapezoid rule.
    ∫T dS = T_u S_u − T_l S_l − ∫S dT (integration by parts). The step must not
    contain a phase boundary (paths insert located boundaries as steps), so the
    integrands are smooth.

    Parameters
    ----------
    problem : Problem
        The bulk, fixed over the step.
    upper, lower : State
        States at the hot and the cold end [K].
    n_sub : int
        Even number of Simpson sub-intervals.
    min_width_k : float
        Steps narrower than this [K] use the trapezoid rule on the endpoints.
    """
    if n_sub % 2:
        raise ValueError("n_sub must be even")
    nodes = step_nodes(problem, upper, lower, n_sub, min_width_k)
    t = np.array([s.temperature_k for s in nodes])
    c = np.array([s.heat_capacity_frozen_j_per_k for s in nodes])
    s = np.array([st.entropy_j_per_k for st in nodes])
    h = (t[-1] - t[0]) / (len(t) - 1)
    trap = h * (c.sum() - 0.5 * (c[0] + c[-1]))
    if len(t) > 2:
        w = _simpson_weights(len(t) - 1) * h
        sensible, s_int = float(w @ c), float(w @ s)
    else:
        sensible, s_int = trap, 0.5 * h * (s[0] + s[-1])
    heat = upper.enthalpy_j - lower.enthalpy_j
    return StepIntegral(
        heat_released_j=heat, sensible_heat_j=sensible, latent_heat_j=heat - sensible,
        entropy_change_j_per_k=lower.entropy_j_per_k - upper.entropy_j_per_k,
        t_ds_j=t[-1] * s[-1] - t[0] * s[0] - s_int,
        quadrature_error_j=abs(sensible - trap), nodes=len(t),
    )


def integrate_step_with_slopes(upper: State, lower: State, upper_d: Derivatives, lower_d: Derivatives,
                               min_width_k: float = 1e-3) -> StepIntegral:
    """As :func:`integrate_step`, with no sub-step states: the end-corrected trapezoid rule.

    ∫_a^b f dT ≈ (h/2)(f_a + f_b) − (h²/12)(f′_b − f′_a), h = b − a (the trapezoid
    rule with its Euler–Maclaurin end correction, error O(h⁵·f⁽⁴⁾); e.g. Davis &
    Rabinowitz 1984, Methods of Numerical Integration, §2.9), for f = C_frozen with
    f′ = d(cp_frozen)/dT and for f = S with f′ = dS/dT, both along the path, from
    :func:`path_derivatives` at the two end states (which must carry the step's
    assemblage). Steps narrower than ``min_width_k`` [K] use the plain trapezoid rule.
    """
    h = upper.temperature_k - lower.temperature_k
    m = upper.mass_kg
    c = np.array([lower.heat_capacity_frozen_j_per_k, upper.heat_capacity_frozen_j_per_k])
    s = np.array([lower.entropy_j_per_k, upper.entropy_j_per_k])
    trap_c, trap_s = 0.5 * h * c.sum(), 0.5 * h * s.sum()
    corr_c = corr_s = 0.0
    if h >= min_width_k:
        corr_c = -h * h / 12.0 * m * (upper_d.cp_frozen_slope_j_per_kg_k2 - lower_d.cp_frozen_slope_j_per_kg_k2)
        corr_s = -h * h / 12.0 * m * (upper_d.ds_dt_j_per_kg_k2 - lower_d.ds_dt_j_per_kg_k2)
    sensible = trap_c + corr_c
    heat = upper.enthalpy_j - lower.enthalpy_j
    return StepIntegral(
        heat_released_j=heat, sensible_heat_j=sensible, latent_heat_j=heat - sensible,
        entropy_change_j_per_k=lower.entropy_j_per_k - upper.entropy_j_per_k,
        t_ds_j=upper.temperature_k * s[1] - lower.temperature_k * s[0] - (trap_s + corr_s),
        quadrature_error_j=abs(corr_c), nodes=2,
    )
