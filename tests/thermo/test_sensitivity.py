"""Exact branch derivatives (implicit differentiation of the equilibrium) against converged states.

dh/dT, ds/dT, dv/dT and dφ/dT from :mod:`thermo.sensitivity` equal central differences of fully
converged, independently verified equilibria at T ± 0.01 K (truncation ~1e-9 relative for these
smooth branches; 1e-6 allowed for the solver's convergence), on multi-phase states of an invented
demo bulk (Kestrel IV scenario, ../shared/DESIGN.md §5) with liquid and up to five phases. The rates
conserve mass: Σ_phases Σ_i a_i dn_i/dT = 0 to round-off.
"""

import numpy as np
import pytest

from thermo.energetics import path_derivatives, solve_state
from thermo.equilibrium import prepare
from thermo.saturation import BoundaryFinder
from thermo.sensitivity import SingularBranch, branch_rates, branch_slopes

PERIDOTITE_LIKE = {"SiO2": 45.0, "Al2O3": 4.4, "FeO": 8.1, "MgO": 38.0, "CaO": 3.5, "Na2O": 0.4}
PROBLEM = prepare(PERIDOTITE_LIKE)
STATES = [(1e5, 1500.0), (4e9, 2000.0), (4e9, 1925.0), (4e9, 1800.0), (10e9, 2250.0)]


@pytest.mark.parametrize(("p", "t"), STATES)
def test_branch_derivatives_equal_differences_of_converged_states(p, t):
    state = solve_state(PROBLEM, p, t)
    d = path_derivatives(PROBLEM, state)
    assert d.stencil == "analytic"
    lo, hi = (solve_state(PROBLEM, p, t + dt) for dt in (-0.01, 0.01))
    assert lo.signature == hi.signature == state.signature

    def diff(f):
        return (f(hi.props) - f(lo.props)) / 0.02

    assert d.cp_effective_j_per_kg_k == pytest.approx(diff(lambda q: q.h_j_per_kg), rel=1e-6)
    assert d.ds_dt_j_per_kg_k2 == pytest.approx(diff(lambda q: q.s_j_per_kg_k), rel=1e-6)
    v_rate = diff(lambda q: q.v_m3_per_kg)
    assert d.alpha_effective_per_k * state.props.v_m3_per_kg == pytest.approx(v_rate, rel=1e-6)
    assert d.melt_fraction_derivative_per_k == pytest.approx(diff(lambda q: q.melt_fraction), rel=1e-6, abs=1e-12)
    # slopes are themselves O(δ²) central differences (δ = 0.02 K) of exact rates; 2.7 K above the solidus
    # (1925 K at 4 GPa) the third derivatives are large, so both sides carry ~1e-4 truncation: 1e-3 relative
    h2 = (hi.props.h_j_per_kg - 2 * state.props.h_j_per_kg + lo.props.h_j_per_kg) / 0.01**2
    assert d.cp_effective_slope_j_per_kg_k2 == pytest.approx(h2, rel=1e-3, abs=1e-3)
    assert d.cp_frozen_slope_j_per_kg_k2 == pytest.approx(diff(lambda q: q.cp_frozen_j_per_kg_k), rel=1e-3)


@pytest.mark.parametrize(("p", "t"), STATES)
def test_branch_rates_conserve_mass(p, t):
    eq = solve_state(PROBLEM, p, t).eq
    rates = branch_rates(eq)
    s = eq.system
    flux = sum((s.pure_stoich[s.pure_names.index(ph.model)] * nd[0] if ph.solution_index < 0
                else s.solutions[ph.solution_index].stoich.T @ nd) for ph, nd in zip(eq.phases, rates.amount_rates,
                                                                                       strict=True))
    scale = max(float(np.abs(nd).max()) for nd in rates.amount_rates)
    assert np.abs(flux).max() <= 1e-10 * max(scale, 1e-30)


def test_a_phase_vanishing_within_the_difference_step_falls_back_to_one_sided_differences():
    """Just below a root-found phase-in boundary the new phase's amount is ~1e-8 of the others: there is
    no two-sided branch, so the slopes are refused and path_derivatives uses one-sided differences."""
    finder, upper, boundary = BoundaryFinder(4e9), solve_state(PROBLEM, 4e9, 2100.0), None
    for t in np.arange(2090.0, 1800.0, -10.0):  # the first phase-in boundary below 2100 K at 4 GPa
        lower = solve_state(PROBLEM, 4e9, float(t), warm=upper)
        found = [b for b in finder.locate(PROBLEM, upper, lower) if b.appearing]
        if found:
            boundary = found[0]
            break
        upper = lower
    assert boundary is not None, "no phase appears between 2100 and 1800 K at 4 GPa"
    state = boundary.below
    with pytest.raises(SingularBranch):
        branch_slopes(state.eq, branch_rates(state.eq), 0.02)
    assert path_derivatives(PROBLEM, state).stencil == "backward"


def test_prediction_along_the_branch_is_second_order_accurate():
    """From 2000 K at 4 GPa (liquid + olivine + orthopyroxene) towards 1995 and 1997.5 K: the error of the
    first-order prediction of amounts and μ shrinks as ΔT² (halving ΔT quarters it: ratio < 0.35), that of
    the unmoved state as ΔT (ratio near 0.5)."""
    from thermo.sensitivity import predict

    here = solve_state(PROBLEM, 4e9, 2000.0)
    rates = branch_rates(here.eq)

    def amounts(eq):
        return np.concatenate([p.amount_mol for p in sorted(eq.phases, key=lambda p: p.name)] + [eq.mu / 1e5])

    errors = {}
    for dt in (5.0, 2.5):
        there = solve_state(PROBLEM, 4e9, 2000.0 - dt, warm=here)
        assert there.signature == here.signature
        guess = predict(here.eq, rates, 2000.0 - dt)
        truth = amounts(there.eq)
        errors[dt] = (np.abs(amounts(guess) - truth).max(), np.abs(amounts(here.eq) - truth).max())
    assert errors[2.5][0] / errors[5.0][0] < 0.35
    assert 0.4 < errors[2.5][1] / errors[5.0][1] < 0.6
    assert errors[5.0][0] < 0.2 * errors[5.0][1]
