"""Isentropes T(P) at constant specific entropy, through the melting region.

At each pressure the temperature is root-found (Brent 1973, Algorithms for
Minimization without Derivatives; :func:`scipy.optimize.brentq`) so that the
specific entropy of the equilibrium assemblage equals the target,
s(P, T) = s0. Along such a path dT/dP = T·α_eff·v / cp_eff (the Maxwell
relation (∂T/∂P)_s = (∂V/∂S)_P, e.g. Callen 1985, Thermodynamics and an
Introduction to Thermostatistics, §7.2), which the tests check.

The isentrope through a potential temperature T_p is the one through
(P_ref = 1e-4 GPa = 1 bar, T_p). At an isobaric invariant s(T) jumps at one
temperature; if the target lies inside the jump, the isentrope sits at the
invariant temperature and the phase proportions are those of the lever rule
between the two sides, x = (s0 − s_below)/(s_above − s_below); this is
flagged in ``on_invariant``.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from thermo.energetics import State, solve_state
from thermo.equilibrium import Problem
from thermo.errors import ConvergenceError, InputError
from thermo.saturation import BoundaryFinder
from thermo.validity import check_conditions

REFERENCE_PRESSURE_GPA = 1e-4


@dataclass(frozen=True)
class Isentrope:
    """T(P) at constant specific entropy (arrays in the order of the pressures given)."""

    specific_entropy_j_per_kg_k: float
    potential_temperature_k: float | None
    reference_pressure_gpa: float
    pressure_gpa: np.ndarray
    temperature_k: np.ndarray
    melt_fraction: np.ndarray
    specific_enthalpy_j_per_kg: np.ndarray
    density_kg_per_m3: np.ndarray
    on_invariant: np.ndarray


class _EntropyRoot:
    """s(P, T) − s0 at one pressure, with warm starts and memoised states."""

    def __init__(self, problem: Problem, pressure_gpa: float, s0: float, warm: State | None):
        self.pb, self.p_pa, self.s0, self.warm = problem, pressure_gpa * 1e9, s0, warm
        self.states: dict[float, State] = {}

    def state(self, t: float) -> State:
        if t not in self.states:
            self.warm = solve_state(self.pb, self.p_pa, t, warm=self.warm)
            self.states[t] = self.warm
        return self.states[t]

    def __call__(self, t: float) -> float:
        return self.state(t).props.s_j_per_kg_k - self.s0


def _bracket(f: _EntropyRoot, guess: float, step: float, t_range: tuple[float, float]) -> tuple[float, float]:
    """An interval [a, b] with f(a) < 0 < f(b), found by doubling steps from ``guess`` [K]."""
    lo, hi = t_range
    a = b = min(max(guess, lo), hi)
    while f(a) > 0.0:
        if a <= lo:
            raise ConvergenceError("isentrope: entropy target below the validity domain", {"t_k": a})
        b, a, step = a, max(lo, a - step), 2 * step
    while f(b) < 0.0:
        if b >= hi:
            raise ConvergenceError("isentrope: entropy target above the validity domain", {"t_k": b})
        a, b, step = b, min(hi, b + step), 2 * step
    return a, b


def _point(f: _EntropyRoot, t: float, xtol: float, probe_k: float = 0.01):
    """(T, φ, h, ρ, on_invariant) at a root; the lever rule where the target lies in an entropy jump."""
    st = f.state(t)
    smooth = 1e3 * 20 * xtol * st.props.cp_frozen_j_per_kg_k / t  # 1000 × the change over the root tolerance
    if abs(f(t)) <= smooth:
        p = st.props
        return t, p.melt_fraction, p.h_j_per_kg, p.density_kg_per_m3, False
    found = BoundaryFinder(f.p_pa).locate(f.pb, f.state(t + probe_k), f.state(t - probe_k))
    b = next((b for b in found if b.isothermal), None)
    if b is None:
        raise ConvergenceError("isentrope: entropy jumps but no isobaric invariant was found", {"t_k": t})
    up, down = b.above.props, b.below.props
    x = (f.s0 - down.s_j_per_kg_k) / (up.s_j_per_kg_k - down.s_j_per_kg_k)
    mix = [(1 - x) * getattr(down, k) + x * getattr(up, k) for k in ("melt_fraction", "h_j_per_kg", "v_m3_per_kg")]
    return b.temperature_k, mix[0], mix[1], 1.0 / mix[2], True


def isentrope(
    problem: Problem,
    pressures_gpa,
    potential_temperature_k: float | None = None,
    specific_entropy_j_per_kg_k: float | None = None,
    xtol_k: float = 1e-7,
    bracket_step_k: float = 20.0,
    progress: Callable[[int, int], None] | None = None,
) -> Isentrope:
    """Temperature, melt fraction, enthalpy and density along an isentrope.

    Parameters
    ----------
    problem : Problem
        Bulk composition (per kg) and candidate phases.
    pressures_gpa : array_like
        Pressures [GPa], visited in the order given (each warm-starts the next).
    potential_temperature_k : float, optional
        T [K] at 1e-4 GPa on the isentrope. Give this or the entropy.
    specific_entropy_j_per_kg_k : float, optional
        Target specific entropy [J/(kg K)] (dataset reference state).
    xtol_k : float
        Root tolerance in T [K].
    bracket_step_k : float
        First step [K] of the bracket search around the previous temperature.
    progress : callable, optional
        Called as ``progress(pressures_done, pressures_total)`` after every pressure.

    Raises
    ------
    InputError
        Neither or both targets given.
    OutOfDomainError
        Pressures or the potential temperature outside the dataset domain.
    """
    if (potential_temperature_k is None) == (specific_entropy_j_per_kg_k is None):
        raise InputError("potential_temperature_k", "give either potential_temperature_k or specific_entropy")
    p = np.atleast_1d(np.asarray(pressures_gpa, float))
    ds = problem.dataset
    check_conditions(ds, p, ds.temperature_range_k[0])
    warm, guess = None, potential_temperature_k
    if potential_temperature_k is not None:
        check_conditions(ds, REFERENCE_PRESSURE_GPA, potential_temperature_k)
        warm = solve_state(problem, REFERENCE_PRESSURE_GPA * 1e9, potential_temperature_k)
        s0 = warm.props.s_j_per_kg_k
    else:
        s0 = float(specific_entropy_j_per_kg_k)
        guess = 0.5 * sum(ds.temperature_range_k)
    rows = []
    for k, pressure in enumerate(p, 1):
        f = _EntropyRoot(problem, float(pressure), s0, warm)
        a, b = _bracket(f, guess, bracket_step_k, ds.temperature_range_k)
        t = a if f(a) == 0.0 else float(brentq(f, a, b, xtol=xtol_k))
        rows.append(_point(f, t, xtol_k))
        warm, guess = f.state(t), t
        if progress is not None:
            progress(k, len(p))
    cols = list(zip(*rows, strict=True))
    return Isentrope(
        specific_entropy_j_per_kg_k=s0, potential_temperature_k=potential_temperature_k,
        reference_pressure_gpa=REFERENCE_PRESSURE_GPA, pressure_gpa=p, temperature_k=np.array(cols[0]),
        melt_fraction=np.array(cols[1]), specific_enthalpy_j_per_kg=np.array(cols[2]),
        density_kg_per_m3=np.array(cols[3]), on_invariant=np.array(cols[4], bool),
    )
