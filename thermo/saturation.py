"""Phase boundaries along an isobar: appearance, disappearance, liquidus, solidus.

Between two converged states whose assemblages differ, each phase that
appears or disappears is located by Brent's method (Brent 1973, Algorithms
for Minimization without Derivatives, ch. 4; :func:`scipy.optimize.brentq`)
on a continuous function of T: its driving force

    D_X(T) = min_x [G_X(x) − a(x)·μ(T)]   [J per mole of formula units]

against the chemical potentials μ(T) of the equilibrium *restricted to the
assemblage on the side where X is absent* (continued metastably across the
boundary). D_X > 0 where X is absent, D_X < 0 where it would form, and
D_X = 0 at the boundary (the condition of heterogeneous equilibrium; White,
Johnson & Dantzig 1958, J. Chem. Phys. 28:751). For a solution the minimum
over composition starts from X's composition on the side where it is present.

When every phase of a change has its root at one temperature (within
``offset_k``) the change is one boundary; otherwise the bracket is split at
the highest root (or halved when no root is found) and both halves are
treated again, so several boundaries in one step are resolved one by one.
Each boundary carries converged states just above and just below it
(T* ± ε, ε ≥ ``offset_k``) and its variance at fixed pressure from the
phase rule (Gibbs 1876), F = C − Φ + 1, with C the rank of the coexisting
phases' compositions and Φ their number: F = 0 is an isobaric invariant
(e.g. a binary eutectic), where h jumps at constant T.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from thermo.endmembers import standard_state
from thermo.energetics import State, phase_oxide_mol, solve_state
from thermo.equilibrium import Problem
from thermo.errors import CompositionError, ConvergenceError, InputError
from thermo.minimize import Equilibrium, PhaseState, equilibrate, minimize_driving_force
from thermo.phases import PhaseSystem, build_system
from thermo.validity import check_conditions


@dataclass(frozen=True)
class Boundary:
    """A located phase boundary on an isobar."""

    temperature_k: float
    appearing: tuple[str, ...]  # on cooling
    disappearing: tuple[str, ...]
    above: State  # converged state at T* + offset
    below: State  # converged state at T* − offset
    variance: int  # F = C − Φ + 1 at fixed P
    offset_k: float

    @property
    def isothermal(self) -> bool:
        """True at an isobaric invariant (F ≤ 0): heat is released at constant T."""
        return self.variance <= 0

    @property
    def enthalpy_jump_j_per_kg(self) -> float:
        """h just above minus h just below [J/kg of the equilibrated bulk]."""
        return self.above.props.h_j_per_kg - self.below.props.h_j_per_kg


def _model(name: str) -> str:
    return name.split("#")[0]


def _remap(eq: Equilibrium, system: PhaseSystem) -> Equilibrium | None:
    """An equilibrium re-expressed on another phase system (for warm starts), or None."""
    names = [sp.name for sp in system.solutions]
    phases = []
    for p in eq.phases:
        if p.solution_index < 0 and p.model in system.pure_names:
            phases.append(PhaseState(p.name, p.model, -1, p.amount_mol.copy()))
        elif p.solution_index >= 0 and p.model in names:
            phases.append(PhaseState(p.name, p.model, names.index(p.model), p.amount_mol.copy()))
    if not phases:
        return None
    return Equilibrium(system, eq.pressure_pa, eq.temperature_k, eq.bulk_mol, phases, eq.mu, eq.standard, {})


def _solution_driving_force(sp, g0, temperature_k, pressure_pa, mu, start) -> float:
    """min over the composition simplex of D(p) = Σ p_i (μ_i(p) − a_i·μ) [J/mol], from ``start``.

    Newton's method on the simplex with exact Hessians (:func:`thermo.minimize.minimize_driving_force`),
    converged until |p_i (g_i − ḡ)| < 1e-10 J/mol (g = μ(p) − a·μ).
    """
    x0 = np.clip(np.asarray(start, float) / np.sum(start), 1e-12, None)
    _, d, _ = minimize_driving_force(sp, x0[None], g0, temperature_k, pressure_pa, mu, 200, gtol=1e-10)
    return float(d[0])


def driving_force(system: PhaseSystem, model: str, eq: Equilibrium, start=None) -> float:
    """Driving force [J/mol of formula units] of phase ``model`` of ``system`` against ``eq``'s μ.

    Positive: the phase is less stable than the assemblage of ``eq``.
    ``start`` (endmember amounts) seeds the composition search of a solution.
    """
    t, p, mu = eq.temperature_k, eq.pressure_pa, eq.mu
    if model in system.pure_names:
        k = system.pure_names.index(model)
        g0 = standard_state(system.params.subset([model]), p, t).g_j_per_mol[0]
        return float(g0 - system.pure_stoich[k] @ mu)
    sp = next(s for s in system.solutions if s.name == model)
    names = [system.params.names[i] for i in sp.endmember_index]
    g0 = standard_state(system.params.subset(names), p, t).g_j_per_mol
    start = np.full(sp.model.size, 1.0) if start is None else np.asarray(start, float)
    return _solution_driving_force(sp, g0, t, p, mu, start)


def _composition(state: State, name: str):
    ph = next((p for p in state.eq.phases if p.name == name), None)
    return None if ph is None else ph.amount_mol


def _variance(above: State, below: State, names: set[str], n_oxides: int) -> int:
    """Phase-rule variance at fixed P, F = C − Φ + 1, C = rank of the phases' compositions.

    Phases named but present in neither state (a fractional parcel's just-removed
    phases, known only by name) are left out of both C and Φ.
    """
    rows = []
    for name in sorted(names):
        st = next((s for s in (above, below) if any(p.name == name for p in s.eq.phases)), None)
        if st is not None:
            v = phase_oxide_mol(st.eq, name, n_oxides)
            rows.append(v / np.abs(v).sum())
    rank = int(np.linalg.matrix_rank(np.array(rows), tol=1e-9)) if rows else 0
    return rank - len(rows) + 1


class BoundaryFinder:
    """Locates the phase boundaries between converged states on one isobar.

    Parameters
    ----------
    pressure_pa : float
    xtol_k : float
        Absolute tolerance of each root [K].
    offset_k : float
        Smallest offset ε [K] of the states taken just above and below a boundary
        (grown ×10, up to ``max_offset_k``, until they show the expected assemblages).
    max_offset_k : float
    edge_tol : float
        |D| [J/mol] below which a phase counts as saturated at a bracket end (the
        minimizer's own minimality tolerance).
    """

    def __init__(self, pressure_pa: float, xtol_k: float = 1e-8, offset_k: float = 1e-6,
                 max_offset_k: float = 1e-2, max_depth: int = 60, edge_tol: float = 1e-3):
        self.pressure_pa = float(pressure_pa)
        self.edge_tol = edge_tol
        self.xtol_k, self.offset_k, self.max_offset_k, self.max_depth = xtol_k, offset_k, max_offset_k, max_depth
        self._restricted: dict = {}
        self.evaluations = 0

    def locate(self, problem: Problem, upper: State, lower: State,
               upper_names: Sequence[str] | None = None) -> list[Boundary]:
        """Boundaries between ``upper`` (hotter) and ``lower``, hottest first.

        ``upper_names`` overrides the assemblage taken as present at the upper
        end (fractional paths: the phases just removed, with which the residual
        liquid is saturated).
        """
        a = tuple(sorted(upper_names)) if upper_names is not None else upper.signature
        return self._locate(problem, upper, lower, a, 0)

    # ------------------------------------------------------------ recursion
    def _locate(self, pb, up, low, a, depth):
        b = low.signature
        if a == b:
            return []
        roots = [self._root(pb, name, a, b, up, low) for name in sorted(set(a) ^ set(b))]
        found = [r for r in roots if r is not None]
        if len(found) == len(roots) and max(found) - min(found) <= self.offset_k:
            t = 0.5 * (max(found) + min(found))
            sides = self._sides(pb, t, a, b, up, low)
            if sides is not None:
                return [self._make(pb, t, a, b, *sides)]
        if up.temperature_k - low.temperature_k <= 2.0 * self.max_offset_k or depth > self.max_depth:
            # no root could be bracketed in a narrow interval: the bracket itself is the boundary
            half = 0.5 * (up.temperature_k - low.temperature_k)
            return [self._make(pb, low.temperature_k + half, a, b, up, low, half)]
        t_split = self._split_temperature(found, up, low)
        mid = solve_state(pb, self.pressure_pa, t_split, warm=low)
        return self._locate(pb, up, mid, a, depth + 1) + self._locate(pb, mid, low, mid.signature, depth + 1)

    def _split_temperature(self, found, up, low):
        margin = 10.0 * self.max_offset_k
        lo, hi = low.temperature_k + margin, up.temperature_k - margin
        cands = [t - margin for t in found if lo < t - margin < hi]
        return max(cands) if cands else 0.5 * (up.temperature_k + low.temperature_k)

    def _sides(self, pb, t, a, b, up, low):
        above = self._side(pb, t, up, +1.0, a)
        below = self._side(pb, t, low, -1.0, b) if above is not None else None
        if below is None:
            return None
        return above[0], below[0], max(above[1], below[1])

    def _side(self, pb, t, ref, sign, want):
        """Converged state at t + sign·ε showing the assemblage ``want`` (ε grown ×10), or None.

        If t + sign·ε reaches the bracket end ``ref``, ``ref`` is the side state (its
        assemblage is the one the bracket was given, including an override).
        """
        eps = max(self.offset_k, 10.0 * self.xtol_k)
        while eps <= self.max_offset_k * (1 + 1e-9):
            tt = t + sign * eps
            if sign * (tt - ref.temperature_k) >= 0.0:  # the bracket end itself is the side state
                return ref, abs(ref.temperature_k - t)
            st = solve_state(pb, self.pressure_pa, tt, warm=ref)
            if st.signature == want:
                return st, eps
            eps *= 10.0
        return None

    def _make(self, pb, t, a, b, above, below, eps):
        names = set(a) | set(b)
        return Boundary(
            temperature_k=float(t), appearing=tuple(sorted(set(b) - set(a))),
            disappearing=tuple(sorted(set(a) - set(b))), above=above, below=below,
            variance=_variance(above, below, names, len(pb.dataset.oxides)), offset_k=float(eps),
        )

    # ----------------------------------------------------------------- roots
    def _restricted_system(self, pb, names):
        models = tuple(sorted({_model(n) for n in names}))
        key = (id(pb.system), models)
        if key not in self._restricted:
            extra = [sp.model for sp in pb.system.solutions if sp.name in models]
            try:
                system = build_system(pb.dataset, pb.bulk.mol_per_kg, phases=list(models), extra_models=extra)
            except CompositionError:
                system = None
            self._restricted[key] = (pb.system, system)  # keep pb.system alive so its id stays unique
        return self._restricted[key][1]

    def _root(self, pb, name, a, b, up, low):
        """Temperature where ``name`` appears or disappears, or None if it cannot be bracketed."""
        appearing = name not in a
        absent, present = (up, low) if appearing else (low, up)
        system = self._restricted_system(pb, a if appearing else b)
        if system is None:
            return None
        start = _composition(present, name)
        warm = [_remap(absent.eq, system)]

        memo = {}

        def f(t):
            if t not in memo:
                eq = equilibrate(system, self.pressure_pa, t, pb.bulk_mol, warm=warm[0])
                warm[0] = eq
                self.evaluations += 1
                memo[t] = driving_force(pb.system, _model(name), eq, start)
            return memo[t]

        try:
            f_absent, f_present = f(absent.temperature_k), f(present.temperature_k)
            if f_absent > 0.0 > f_present:
                return float(brentq(f, low.temperature_k, up.temperature_k, xtol=self.xtol_k))
            if f_absent > 0.0 and abs(f_present) <= self.edge_tol:
                return present.temperature_k  # saturated at the bracket end (a fractional parcel's removed phase)
            return None
        except (ConvergenceError, CompositionError, StopIteration):
            return None


# -------------------------------------------------------------- scans
@dataclass(frozen=True)
class MeltingInterval:
    """Liquidus and solidus on one isobar (None where not inside the scanned range)."""

    pressure_gpa: float
    liquidus_k: float | None
    solidus_k: float | None
    boundaries: tuple[Boundary, ...]
    notes: tuple[str, ...]


def liquidus_of(boundaries: Sequence[Boundary]) -> float | None:
    """T [K] of the boundary where an all-liquid assemblage first gains a solid, or None."""
    return next((b.temperature_k for b in boundaries if all_liquid(b.above) and not all_liquid(b.below)), None)


def solidus_of(boundaries: Sequence[Boundary]) -> float | None:
    """T [K] of the boundary below which no liquid remains, or None."""
    return next((b.temperature_k for b in boundaries if has_liquid(b.above) and not has_liquid(b.below)), None)


def _present(state: State):
    sig = set(state.signature)
    return [p for p in state.props.phases if p.name in sig]


def all_liquid(state: State) -> bool:
    """True if every phase present is a liquid."""
    return all(p.is_liquid for p in _present(state))


def has_liquid(state: State) -> bool:
    return any(p.is_liquid for p in _present(state))


def scan_isobar(problem: Problem, pressure_gpa: float, t_high_k: float, t_low_k: float, step_k: float,
                finder: BoundaryFinder | None = None) -> tuple[list[State], list[Boundary]]:
    """Converged states on a descending T grid and every boundary between them, hottest first."""
    if not (t_high_k > t_low_k and step_k > 0):
        raise InputError("temperature_k", "need t_high_k > t_low_k and step_k > 0")
    check_conditions(problem.dataset, pressure_gpa, [t_high_k, t_low_k])
    finder = finder or BoundaryFinder(pressure_gpa * 1e9)
    n = max(1, int(np.ceil((t_high_k - t_low_k) / step_k - 1e-9)))
    states = [solve_state(problem, pressure_gpa * 1e9, t_high_k)]
    bounds: list[Boundary] = []
    for t in np.linspace(t_high_k, t_low_k, n + 1)[1:]:
        states.append(solve_state(problem, pressure_gpa * 1e9, float(t), warm=states[-1]))
        bounds += finder.locate(problem, states[-2], states[-1])
    return states, bounds


def melting_interval(problem: Problem, pressure_gpa: float, t_high_k: float, t_low_k: float,
                     step_k: float = 20.0) -> MeltingInterval:
    """Liquidus and solidus [K] at one pressure [GPa], root-found (equilibrium crystallization).

    Scans from ``t_high_k`` down to ``t_low_k`` in steps of ``step_k`` and locates
    every boundary to ``BoundaryFinder.xtol_k``; the step only needs to be fine
    enough not to step over a phase field entirely.
    """
    states, bounds = scan_isobar(problem, pressure_gpa, t_high_k, t_low_k, step_k)
    notes = []
    liq = liquidus_of(bounds)
    if liq is None:
        notes.append("liquidus above the scanned range" if not all_liquid(states[0])
                     else "liquidus below the scanned range")
    solidus = solidus_of(bounds)
    if solidus is None:
        notes.append("solidus below the scanned range" if has_liquid(states[-1])
                     else "solidus above the scanned range")
    return MeltingInterval(pressure_gpa, liq, solidus, tuple(bounds), tuple(notes))


@dataclass(frozen=True)
class SaturationEvent:
    """One phase appearing or disappearing on cooling."""

    phase: str
    event: str  # "appears" or "disappears"
    temperature_k: float
    isothermal: bool


def saturation_sequence(boundaries: Sequence[Boundary]) -> list[SaturationEvent]:
    """Phases in order of appearance/disappearance on cooling (hottest first)."""
    out = []
    for b in sorted(boundaries, key=lambda x: -x.temperature_k):
        out += [SaturationEvent(n, "appears", b.temperature_k, b.isothermal) for n in b.appearing]
        out += [SaturationEvent(n, "disappears", b.temperature_k, b.isothermal) for n in b.disappearing]
    return out
