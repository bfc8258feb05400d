"""Gibbs energy minimization at fixed pressure, temperature and bulk composition.

Method (a published route, see References):

1. **Linear programme over candidate columns.** Every pure phase and a set of
   discrete compositions of every solution become columns (composition in
   oxide moles, molar G). Minimizing Σ G_k λ_k subject to Σ a_k λ_k = b,
   λ ≥ 0 (HiGHS via :func:`scipy.optimize.linprog`) gives the best assemblage
   of those columns; the equality-constraint duals are the chemical potentials
   μ of the oxide components (White, Johnson & Dantzig 1958, J. Chem. Phys.
   28:751; Dantzig & Wolfe 1960, Oper. Res. 8:101).
2. **Column generation.** For each solution, the driving force
   D(p) = G(p) - a(p)·μ is minimized over its composition simplex by a batched
   Newton method from several starts; compositions with D < 0 are added as new
   columns, until no solution has a negative driving force.
3. **Newton polish.** Columns of one solution close in composition are merged
   into one phase (distinct ones kept: miscibility gaps), and the equilibrium
   conditions μ_i(phase) = a_i·μ with mass balance are solved by Newton's
   method to round-off. A final check minimizes every solution's driving force
   at the polished μ; any negative value sends the solver back to step 1.

Derivatives of chemical potentials are exact complex-step derivatives
(Squire & Trapp 1998, SIAM Rev. 40:110).

Warm start: the phases of a previous result are tried first (polish + check);
if they pass, no linear programme is needed.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
from scipy.constants import R
from scipy.optimize import linprog, nnls

from thermo import kernels
from thermo.endmembers import StandardState, standard_state
from thermo.errors import CompositionError, ConvergenceError
from thermo.phases import PhaseSystem, SolutionPhase, span
from thermo.programme import HIGHS_OPTIONS, ColumnProgramme, InfeasibleError


@dataclass(frozen=True)
class SolverOptions:
    """Tolerances and limits of :func:`equilibrate` (energies in J per mole of formula units)."""

    driving_force_tol: float = 1.0  # column generation stops (and polish starts) when no D < -tol
    colgen_newton_iter: int = 8  # Newton iterations per start while generating columns
    colgen_skip_rt: float = 3.0  # while generating columns, skip solutions whose sampled D > this x RT
    check_skip_rt: float = 12.0  # in the final check, skip Newton refinement above this x RT
    warm_skip_rt: float = 1.0  # same, when a warm start supplies last step's best compositions
    check_tol: float = 1e-3  # final minimality check: no D below -check_tol
    max_outer: int = 60  # 40 ran out near the critical point of the liquid gap (robustness state 576, 50 needed)
    prune_rt: float = 4.0  # after the first programme, drop columns with reduced cost above this x RT
    max_setbacks: int = 3  # failed polish/refine rounds before falling back to column generation alone
    newton_iter: int = 40
    polish_iter: int = 80
    merge_distance: float = 0.1  # columns of one solution closer than this (oxide mole fractions) are one phase
    starts: int = 3
    mass_tol: float = 1e-12


@dataclass
class PhaseState:
    """One phase of an equilibrium assemblage."""

    name: str  # solution or endmember name; instances of one solution get '#2', ...
    model: str  # solution name or pure endmember name
    solution_index: int  # -1 for pure phases
    amount_mol: np.ndarray  # moles of each endmember formula unit (pure: length 1)


@dataclass
class Equilibrium:
    """Raw result of :func:`equilibrate` (see :mod:`thermo.assemblage` for properties)."""

    system: PhaseSystem
    pressure_pa: float
    temperature_k: float
    bulk_mol: np.ndarray
    phases: list[PhaseState]
    mu: np.ndarray  # chemical potentials of the active components [J/mol]
    standard: StandardState
    diagnostics: dict = field(default_factory=dict)
    probes: dict = field(default_factory=dict)  # solution index -> best compositions found by the last check
    # solution index -> thermo.kernels arguments at this (P, T) (derived data; reused by property code)
    kernel_args: dict = field(default_factory=dict, repr=False, compare=False)

    def solution_kernel_args(self, si: int) -> tuple:
        """Kernel arguments of solution ``si`` at this equilibrium's (P, T) and standard state."""
        if si not in self.kernel_args:
            ph = self.system.solutions[si]
            self.kernel_args[si] = _kernel_args(ph, self.standard.g_j_per_mol[ph.endmember_index],
                                                self.temperature_k, self.pressure_pa)
        return self.kernel_args[si]


# ------------------------------------------------------------ solution helpers
def _kernel_args(phase: SolutionPhase, g0, t, p) -> tuple:
    """Arguments of the :mod:`thermo.kernels` functions for one solution at (T, P) with standard μ ``g0``."""
    return (*phase.model.kernel_args(t, p), np.ascontiguousarray(g0, dtype=float), R * t)


def _as_rows(x) -> np.ndarray:
    return np.ascontiguousarray(x, dtype=float)


def _mu_jacobian(kargs: tuple, n):
    """μ (K, m) and the exact ∂μ_i/∂n_j (K, m, m) for a batch of amounts n (K, m)."""
    return kernels.chemical_potentials_jacobian(_as_rows(n), *kargs)


def _driving_force(kargs: tuple, x, target) -> np.ndarray:
    """D(x) = Σ x_i(μ_i − a_i·μ)/Σ x_i [J/mol] for compositions x (K, m); ``target`` = a·μ (m,)."""
    return kernels.driving_forces(_as_rows(x), *kargs, _as_rows(target))


def minimize_driving_force(phase, starts, g0, t, p, mu_c, iters, gtol=1e-6, kargs=None):
    """Batched Newton minimization of D(x) on the simplex from ``starts`` (K, m).

    Rows converge independently (projected gradient times x below ``gtol`` J/mol).
    Returns compositions, driving forces and G evaluations (see
    :func:`thermo.kernels.minimize_driving_force`).
    """
    kargs = kargs if kargs is not None else _kernel_args(phase, g0, t, p)
    return kernels.minimize_driving_force(_as_rows(starts), *kargs, _as_rows(phase.stoich @ mu_c), int(iters),
                                          float(gtol))


def _bulk_like(phase: SolutionPhase, bulk) -> np.ndarray:
    """Compositions of a solution closest to the bulk's oxide proportions, and blends of them with the centre.

    Near a liquidus the liquid is close to the bulk; these starts find it even where mixing
    terms make the liquid's G surface non-convex.
    """
    x, _ = nnls(phase.stoich.T, bulk / bulk.sum())
    if not x.sum() > 0:
        return np.zeros((0, phase.model.size))
    x = x / x.sum()
    m = phase.model.size
    return np.array([np.clip(f * x + (1 - f) / m, 1e-6, None) for f in (0.999, 0.9, 0.6)])


@lru_cache(maxsize=64)
def _simplex_points(m: int, count: int = 60) -> np.ndarray:
    """Deterministic spread of compositions on an m-simplex (vertices inset, lattice or quasi-random)."""
    eps = 1e-4
    pts = [np.full(m, eps) + (1.0 - m * eps) * np.eye(m)[i] for i in range(m)]
    pts.append(np.full(m, 1.0 / m))
    if m == 2:
        pts += [np.array([f, 1.0 - f]) for f in np.linspace(0.05, 0.95, 19)]
    else:
        rng = np.random.default_rng(12345 + m)
        pts += list(rng.dirichlet(np.full(m, 0.7), size=count))
    out = np.array(pts)
    out.setflags(write=False)
    return out


def _start_pool(system: PhaseSystem, bulk: np.ndarray) -> tuple[np.ndarray, ...]:
    """Per solution: the simplex spread and the bulk-like compositions (cached on the system per bulk)."""
    cache = system.scratch.setdefault("start_pool", {})
    key = bulk.tobytes()
    pools = cache.get(key)
    if pools is None:
        if len(cache) >= 64:
            cache.clear()
        # shared between solves: never written to (a solver appends by making new arrays); left writeable
        # because numba compiles read-only arrays as a separate signature
        pools = tuple(np.vstack([_simplex_points(ph.model.size), _bulk_like(ph, bulk)]) for ph in system.solutions)
        cache[key] = pools
    return pools


# ------------------------------------------------------------------ LP stage
class _Columns:
    """Candidate columns of the linear programme: oxide composition (c,), molar G and owner each.

    Owner: (-1, pure index) or (solution index, endmember fractions). Compositions and G live in
    growing arrays so that the programme reads them without copying column by column.
    """

    def __init__(self, n_components: int) -> None:
        self._comp = np.empty((512, n_components))
        self._g = np.empty(512)
        self.n = 0
        self.owner: list = []

    @property
    def comp(self) -> np.ndarray:
        return self._comp[: self.n]

    @property
    def g(self) -> np.ndarray:
        return self._g[: self.n]

    def add_block(self, comp, g, owners: list) -> None:
        comp = np.atleast_2d(np.asarray(comp, float))
        k = len(comp)
        if self.n + k > len(self._g):
            size = max(2 * len(self._g), self.n + k)
            self._comp = np.vstack([self._comp[: self.n], np.empty((size - self.n, self._comp.shape[1]))])
            self._g = np.concatenate([self._g[: self.n], np.empty(size - self.n)])
        self._comp[self.n: self.n + k] = comp
        self._g[self.n: self.n + k] = g
        self.n += k
        self.owner.extend(owners)

    def add(self, comp, g, owner) -> None:
        self.add_block(comp, [float(g)], [owner])

    def prune(self, mu, lam, limit: float) -> np.ndarray:
        """Drop columns whose reduced cost G - a·μ exceeds ``limit`` (never basic ones); returns the kept mask."""
        reduced = self.g - self.comp @ mu
        # pure phases and exact endmember columns always stay: they keep bulks on a join representable
        anchor = np.array([o[0] == -1 or np.count_nonzero(o[1]) == 1 for o in self.owner])
        keep = (reduced <= limit) | (lam > 0.0) | anchor
        kept = int(keep.sum())
        self._comp[:kept] = self.comp[keep]
        self._g[:kept] = self.g[keep]
        self.n = kept
        self.owner = [o for o, k in zip(self.owner, keep, strict=True) if k]
        return keep


def _solve_lp(cols: _Columns, bulk, mu_ref, programme: ColumnProgramme | None = None):
    """Optimal λ of the columns and the chemical potentials μ (equality duals) [J/mol].

    The persistent HiGHS model of ``programme`` is used first; degenerate programmes (bulks on a
    join) that it does not solve to optimality go to scipy's HiGHS solvers in turn.
    """
    comp = cols.comp
    try:
        if programme is not None:
            try:
                solved = programme.solve(comp, cols.g, mu_ref)
            except InfeasibleError:  # confirmed below by fresh solves before the bulk is refused
                programme.reset()
                solved = None
            if solved is not None:
                return solved
        a = comp.T
        g = cols.g - mu_ref @ a
        scale = max(1.0, float(np.abs(g).max()))
        for method in ("highs", "highs-ds", "highs-ipm"):
            options = HIGHS_OPTIONS if method == "highs" else {}
            res = linprog(g / scale, A_eq=a, b_eq=bulk, bounds=(0, None), method=method, options=options)
            if res.status == 0:
                break
        if res.status == 2:  # every HiGHS solver found the programme infeasible
            raise InfeasibleError
    except InfeasibleError:
        raise CompositionError(
            "composition.oxides",
            "the bulk composition cannot be made from the candidate phases (outside the phases' chemical system)",
        ) from None
    if res.status != 0:
        raise ConvergenceError(f"linear programme failed: {res.message}", {"lp_status": res.status})
    return res.x, mu_ref + scale * np.asarray(res.eqlin.marginals)


class _LazyKernelArgs(dict):
    """Kernel arguments per solution index, built on first use (a polish needs only the phases present)."""

    def __init__(self, solver: _Solver) -> None:
        super().__init__()
        self._solver = solver

    def __missing__(self, si: int) -> tuple:
        sv = self._solver
        ph = sv.s.solutions[si]
        value = self[si] = _kernel_args(ph, sv.g0[ph.endmember_index], sv.t, sv.p)
        return value


class _Solver:
    def __init__(self, system: PhaseSystem, p, t, bulk, options: SolverOptions,
                 standard: StandardState | None = None):
        self.s, self.p, self.t, self.opt = system, p, t, options
        self.bulk = np.asarray(bulk, float)
        self.std = standard if standard is not None else standard_state(system.params, p, t)
        self.g0 = self.std.g_j_per_mol
        self.evals = 0
        self.pool = list(_start_pool(system, self.bulk))
        self.probes: dict = {}
        self.skip_check_rt = options.check_skip_rt
        self.programme = ColumnProgramme(self.bulk)
        self.kargs = _LazyKernelArgs(self)

    def g0_of(self, phase: SolutionPhase):
        return self.g0[phase.endmember_index]

    def solution_column(self, si, x):
        ph = self.s.solutions[si]
        x = x / x.sum()
        return x @ ph.stoich, float(self.molar_gibbs(si, x[None])[0])

    def molar_gibbs(self, si, x) -> np.ndarray:
        """G per mole of formula units, Σ x_i μ_i / Σ x_i, for compositions x (K, m) of solution ``si``."""
        x = _as_rows(x)
        return np.sum(x * kernels.chemical_potentials(x, *self.kargs[si]), axis=1) / np.sum(x, axis=1)

    def initial_columns(self, warm_phases):
        cols = _Columns(len(self.bulk))
        n_pure = self.s.n_pure
        cols.add_block(self.s.pure_stoich, self.g0[:n_pure], [(-1, k) for k in range(n_pure)])
        for si, ph in enumerate(self.s.solutions):
            pts = self.pool[si]
            gs = self.molar_gibbs(si, pts)
            self.evals += len(pts)
            cols.add_block(pts @ ph.stoich, gs, [(si, x) for x in pts])
            # exact pure-endmember columns (activity 1): bulks on a solution's boundary stay reachable
            eye = np.eye(ph.model.size)
            cols.add_block(ph.stoich, self.g0_of(ph), [(si, e) for e in eye])
        for wp in warm_phases or []:
            if wp.solution_index >= 0:
                comp, g = self.solution_column(wp.solution_index, wp.amount_mol)
                cols.add(comp, g, (wp.solution_index, wp.amount_mol / wp.amount_mol.sum()))
        return cols

    def best_driving_forces(self, mu, extra_starts=None, iters=None, skip_above=np.inf):
        """Minimize every solution's driving force; returns list of (x (K,m), D (K,)).

        Solutions whose best sampled driving force exceeds ``skip_above`` [J/mol]
        (and that have no extra starts) are not refined by Newton's method.
        """
        out = []
        for si, ph in enumerate(self.s.solutions):
            pool = self.pool[si]
            target = ph.stoich @ mu
            probes = self.probes.get(si)
            if probes is not None:
                # warm check: last step's local minimizers are the main starts, plus the best sampled point
                both = np.concatenate([probes, pool])
                d_all = _driving_force(self.kargs[si], both, target)
                self.evals += len(both)
                n_probes = len(probes)
                k = n_probes + int(d_all[n_probes:].argmin())
                starts, d_starts = both[: k + 1], d_all[: k + 1]
                if k > n_probes:  # the probes and the best sampled point only
                    starts = np.concatenate([starts[:n_probes], starts[k:]])
                    d_starts = np.concatenate([d_starts[:n_probes], d_starts[k:]])
            else:  # cold: the best sampled points and every (inset) vertex, so no corner is left unexplored
                d = _driving_force(self.kargs[si], pool, target)
                self.evals += len(pool)
                order = np.unique(np.concatenate([np.argsort(d)[: self.opt.starts], np.arange(ph.model.size)]))
                starts, d_starts = pool[order], d[order]
            if d_starts.min() > skip_above and not (extra_starts and si in extra_starts):
                out.append((starts, d_starts))
                continue
            if extra_starts and si in extra_starts:
                starts = np.vstack([starts, extra_starts[si]])
            x, dv, ev = minimize_driving_force(
                ph, starts, None, self.t, self.p, mu, iters or self.opt.newton_iter, kargs=self.kargs[si]
            )
            self.evals += ev
            out.append((x, dv))
        return out


def _oxide_fraction(comp):
    return comp / comp.sum()


def _mergeable(solver: _Solver, cols: _Columns, lam, group: list[int], k: int, merge_distance: float) -> bool:
    """Column k joins a group of columns of the same solution if close and on a convex stretch of G.

    Convexity test: G at the amount-weighted composition must not exceed the columns' weighted
    G (otherwise the columns straddle a miscibility gap and stay separate phases).
    """
    first = cols.owner[group[0]]
    if cols.owner[k][0] == -1 or first[0] != cols.owner[k][0]:
        return False
    dist = np.abs(_oxide_fraction(cols.comp[k]) - _oxide_fraction(cols.comp[group[0]])).max()
    if dist >= merge_distance:
        return False
    members = [*group, k]
    n = sum(lam[j] * cols.owner[j][1] for j in members)
    _, g_merged = solver.solution_column(first[0], n)
    g_columns = sum(lam[j] * cols.g[j] for j in members) / n.sum()
    return g_merged <= g_columns + 1e-9 * abs(g_columns)


def _phases_from_lp(solver: _Solver, cols: _Columns, lam, merge_distance: float) -> list[PhaseState]:
    """Merge active LP columns into phases (one per distinct composition of a solution)."""
    active = np.flatnonzero(lam > 1e-12 * max(1.0, lam.max()))
    groups: list[list[int]] = []
    for k in active:
        for grp in groups:
            if _mergeable(solver, cols, lam, grp, k, merge_distance):
                grp.append(k)
                break
        else:
            groups.append([k])
    phases = []
    for grp in groups:
        owner = cols.owner[grp[0]]
        if owner[0] == -1:
            k = owner[1]
            amt = np.array([lam[grp].sum()])
            phases.append(PhaseState(solver.s.pure_names[k], solver.s.pure_names[k], -1, amt))
        else:
            n = sum(lam[k] * cols.owner[k][1] for k in grp)
            name = solver.s.solutions[owner[0]].name
            phases.append(PhaseState(name, name, owner[0], np.asarray(n, float)))
    return _name_instances(phases)


def _name_instances(phases):
    seen: dict[str, int] = {}
    for ph in phases:
        seen[ph.model] = seen.get(ph.model, 0) + 1
        ph.name = ph.model if seen[ph.model] == 1 else f"{ph.model}#{seen[ph.model]}"
    return phases


# --------------------------------------------------------------- polish stage
def assemblage_basis(system: PhaseSystem, phases: list[PhaseState]) -> np.ndarray:
    """Orthonormal basis (c, r) of the compositions the present phases span (cached per phase set)."""
    cache = system.scratch.setdefault("assemblage_basis", {})
    key = tuple(p.model for p in phases)
    basis = cache.get(key)
    if basis is None:
        rows = [system.pure_stoich[[system.pure_names.index(p.model)]] if p.solution_index < 0
                else system.solutions[p.solution_index].stoich for p in phases]
        basis = span(np.vstack(rows))
        basis.setflags(write=False)
        if len(cache) >= 512:
            cache.clear()
        cache[key] = basis
    return basis


@dataclass
class _PolishLayout:
    """What the Newton polish needs that does not change while the phase list stays the same."""

    offs: np.ndarray  # variable offsets per phase (n_phases + 1)
    is_log: np.ndarray  # (nv,) True for solution endmembers (unknown ln n)
    stoich: np.ndarray  # (nv, c) oxide moles of every variable's formula unit
    basis: np.ndarray  # (c, r) span of the phases' compositions
    template: np.ndarray  # (nv + r, nv + r) Jacobian with the constant coupling blocks filled in
    pure_g0: np.ndarray  # (nv,) standard μ of pure-phase variables (0 elsewhere)
    blocks: list  # (slice, kernel args) of each solution phase
    pure_idx: np.ndarray  # positions of the pure-phase variables
    twins: bool  # two instances of one solution present (they may have to be merged)

    @classmethod
    def of(cls, solver: _Solver, phases: list[PhaseState]) -> _PolishLayout:
        s = solver.s
        sizes = [len(ph.amount_mol) for ph in phases]
        offs = np.concatenate([[0], np.cumsum(sizes)]).astype(int)
        nv = int(offs[-1])
        basis = assemblage_basis(solver.s, phases)
        c = basis.shape[1]
        is_log = np.zeros(nv, bool)
        pure_g0 = np.zeros(nv)
        rows, blocks = [], []
        for j, ph in enumerate(phases):
            sl = slice(offs[j], offs[j + 1])
            if ph.solution_index < 0:
                k = s.pure_names.index(ph.model)
                rows.append(s.pure_stoich[[k]])
                pure_g0[sl] = solver.g0[k]
            else:
                rows.append(s.solutions[ph.solution_index].stoich)
                is_log[sl] = True
                blocks.append((sl, solver.kargs[ph.solution_index]))
        stoich = np.vstack(rows)
        ab = stoich @ basis
        template = np.zeros((nv + c, nv + c))
        template[:nv, nv:] = -ab
        template[nv:, :nv] = ab.T
        models = [ph.solution_index for ph in phases if ph.solution_index >= 0]
        return cls(offs, is_log, stoich, basis, template, pure_g0, blocks, np.flatnonzero(~is_log),
                   len(set(models)) < len(models))


def _polish_system(solver: _Solver, lay: _PolishLayout, z, mu_perp):
    """Residuals and Jacobian of the equilibrium conditions for unknowns z = (amounts, μ_reduced).

    μ = μ_perp + basis·μ_reduced: only the chemical potentials the present phases can fix are
    unknowns; the rest (μ_perp) keeps the linear programme's values, which certify minimality
    when the assemblage spans fewer components than the system. Rows: μ_i(phase) − a_i·μ for every
    variable (pure phases: G° − a·μ), then basisᵀ(Σ a n − b).
    """
    nv = int(lay.offs[-1])
    n = z[:nv]
    mu = mu_perp + lay.basis @ z[nv:]
    jac = lay.template.copy()
    r = np.empty(len(z))
    r[:nv] = lay.pure_g0 - lay.stoich @ mu
    for sl, kargs in lay.blocks:
        muj, hj = _mu_jacobian(kargs, n[None, sl])
        solver.evals += sl.stop - sl.start + 1
        r[sl] += muj[0]
        jac[sl, sl] = hj[0]
    mass = lay.stoich.T @ n - solver.bulk
    r[nv:] = lay.basis.T @ mass
    return r, jac, mass


def _merge_twins(solver: _Solver, phases: list[PhaseState], tol: float = 1e-5) -> bool:
    """Merge two instances of one solution whose compositions coincide; True if merged."""
    for j, a in enumerate(phases):
        for k in range(j + 1, len(phases)):
            b = phases[k]
            if a.solution_index < 0 or a.solution_index != b.solution_index:
                continue
            a_st = solver.s.solutions[a.solution_index].stoich
            fa, fb = _oxide_fraction(a.amount_mol @ a_st), _oxide_fraction(b.amount_mol @ a_st)
            if np.abs(fa - fb).max() < tol:
                a.amount_mol = a.amount_mol + b.amount_mol
                del phases[k]
                return True
    return False


def _seeded(phases: list[PhaseState], fraction: float = 1e-9) -> list[PhaseState]:
    """Copies of ``phases`` whose solution endmembers below ``fraction`` of their phase are raised to it."""
    out = []
    for p in phases:
        n = np.asarray(p.amount_mol, float)
        if p.solution_index >= 0 and n.size > 1:
            n = np.maximum(n, fraction * n.sum())
        out.append(PhaseState(p.name, p.model, p.solution_index, n.copy()))
    return out


def _polish(solver: _Solver, phases: list[PhaseState], mu0):
    """Newton solution of μ_i(phase) = a_i·μ and mass balance, to round-off.

    Unknowns are ln n_i for the endmembers of solution phases (so amounts stay
    positive and the ideal-mixing terms are linear), the amounts of pure phases,
    and the reduced chemical potentials. A pure phase whose amount the Newton step
    drives negative, or a solution phase whose amount collapses, is removed (the
    minimality check adds back any phase that should be present). Returns
    (phases, μ) or None if the iteration does not converge.
    """
    phases = [PhaseState(p.name, p.model, p.solution_index, np.asarray(p.amount_mol, float).copy()) for p in phases]
    scale_b = np.abs(solver.bulk).max()
    tiny = 1e-300
    mu_full = np.asarray(mu0, float).copy()
    lay, layout_of = None, None
    for _ in range(solver.opt.polish_iter):
        if layout_of != [ph.model for ph in phases]:
            lay, layout_of = _PolishLayout.of(solver, phases), [ph.model for ph in phases]
        basis, offs, is_log = lay.basis, lay.offs, lay.is_log
        mu_r = basis.T @ mu_full
        mu_perp = mu_full - basis @ mu_r
        z = np.concatenate([*(ph.amount_mol for ph in phases), mu_r])
        r, jac, mass = _polish_system(solver, lay, z, mu_perp)
        nv = int(offs[-1])
        totals_phase = np.add.reduceat(z[:nv], offs[:-1])
        negligible = np.flatnonzero(totals_phase < 1e-12 * scale_b)
        if negligible.size and len(phases) > 1:
            del phases[int(negligible[0])]
            continue
        if lay.twins and _merge_twins(solver, phases):
            continue
        mass_ok = np.abs(mass).max() < solver.opt.mass_tol * scale_b
        if mass_ok and np.abs(r[:nv]).max() < 1e-7:
            return phases, mu_full
        totals = np.repeat(totals_phase, np.diff(offs))
        amounts = np.maximum(z[:nv], tiny)
        # endmembers below 1e-30 of their phase are negligible: frozen, their residual ignored
        frozen = is_log & (amounts < 1e-30 * totals)
        r_live = np.where(frozen, 0.0, r[:nv])
        if mass_ok and np.abs(r_live).max() < 1e-7:
            return phases, mu_full
        jac[:, :nv] *= np.where(is_log, amounts, 1.0)
        try:
            if frozen.any():
                act = np.concatenate([~frozen, np.ones(len(mu_r), bool)])
                dz = np.zeros(len(z))
                dz[act] = np.linalg.solve(jac[np.ix_(act, act)], -r[act])
            else:
                dz = np.linalg.solve(jac, -r)
        except np.linalg.LinAlgError:
            return None
        if not np.all(np.isfinite(dz)):
            return None
        step = dz[:nv]
        step[is_log] = np.clip(step[is_log], -4.0, 2.0)
        alpha = 1.0
        pure_idx = lay.pure_idx
        new_pure = amounts[pure_idx] + alpha * step[pure_idx]
        if pure_idx.size and new_pure.min() < 0.0:
            with np.errstate(divide="ignore", invalid="ignore"):
                ratio = np.where(new_pure < 0, -amounts[pure_idx] / (alpha * step[pure_idx]), np.inf)
            k = int(np.argmin(ratio))
            if ratio[k] < 0.5 and len(phases) > 1:
                j = int(np.searchsorted(offs, pure_idx[k], side="right") - 1)
                del phases[j]
                continue
            alpha *= 0.99 * ratio[k]
        new_amounts = np.where(is_log, amounts * np.exp(alpha * np.where(is_log, step, 0.0)), amounts + alpha * step)
        for j, ph in enumerate(phases):
            ph.amount_mol = new_amounts[offs[j]: offs[j + 1]]
        mu_full = mu_perp + basis @ (mu_r + alpha * dz[nv:])
        totals = np.add.reduceat(new_amounts, offs[:-1])
        if len(phases) > 1 and totals.min() < 1e-13 * scale_b:
            del phases[int(np.argmin(totals))]
        elif alpha == 1.0 and np.abs(r_live).max() < 1e-5 and np.abs(mass).max() < 1e-9 * scale_b:
            # a full Newton step from residuals this small leaves ~1e-10 J/mol (quadratic convergence):
            # the state after it is converged without evaluating the system once more
            return phases, mu_full
    return None


# ------------------------------------------------------------------ driver
def _check(solver: _Solver, phases, mu):
    """Smallest driving force of every solution (including second instances) and pure phase."""
    extra = {}
    for ph in phases:
        if ph.solution_index >= 0 and _can_unmix(solver.s.solutions[ph.solution_index].model, solver.t, solver.p):
            extra.setdefault(ph.solution_index, []).append(ph.amount_mol / ph.amount_mol.sum())
    extra = {k: np.array(v) for k, v in extra.items()}
    found = solver.best_driving_forces(mu, extra, skip_above=solver.skip_check_rt * R * solver.t)
    pure_d = solver.g0[: solver.s.n_pure] - solver.s.pure_stoich @ mu
    return found, pure_d


def _can_unmix(model, t, p) -> bool:
    """False when G is convex in composition: one ideal mixing site or units and no positive W."""
    one_site = model.kind == "units" or len(set(model.site_of_column.tolist())) <= 1
    return not (one_site and np.all(model.w(t, p) <= 0.0))


def _probes(found) -> dict:
    """Distinct local minimizers of each solution's driving force from a check (seeds for the next one)."""
    out = {}
    for si, (x, dv) in enumerate(found):
        xs = np.ascontiguousarray(x[np.argsort(dv)], dtype=float)
        out[si] = xs[kernels.distinct_rows(xs, 1e-3, 4)]  # best first, none within 1e-3 of a better one
    return out


def _absent_min(solver, phases, found, pure_d):
    present_pure = {ph.model for ph in phases if ph.solution_index < 0}
    vals = [d for k, d in enumerate(pure_d) if solver.s.pure_names[k] not in present_pure]
    present_sol = {ph.solution_index for ph in phases if ph.solution_index >= 0}
    for si, (_, dv) in enumerate(found):
        if si not in present_sol:
            vals.append(float(dv.min()))
    return float(min(vals)) if vals else 0.0


def equilibrate(
    system: PhaseSystem,
    pressure_pa: float,
    temperature_k: float,
    bulk_mol,
    warm: Equilibrium | None = None,
    options: SolverOptions | None = None,
    verify: bool = True,
    standard: StandardState | None = None,
) -> Equilibrium:
    """Stable assemblage of minimum Gibbs energy at fixed P, T and bulk composition.

    With ``verify=False`` and a warm start, the warm assemblage is only re-polished
    (phases that vanish are dropped, none are added, no minimality check): the
    equilibrium constrained to that assemblage, used for derivatives along one branch
    (``diagnostics["verified"]`` is then False). If the polish fails, a full solve follows.

    Parameters
    ----------
    system : PhaseSystem
        Candidate phases over the active components (see :func:`thermo.phases.build_system`).
    pressure_pa, temperature_k : float
        Pressure [Pa] and temperature [K].
    bulk_mol : array_like, shape (c,)
        Moles of each active component.
    warm : Equilibrium, optional
        A previous result whose phases are tried first.
    options : SolverOptions, optional
    standard : StandardState, optional
        The standard state of ``system.params`` at this (P, T), when the caller has it already.

    Raises
    ------
    CompositionError
        If the bulk cannot be made from the candidate phases.
    ConvergenceError
        If the solver does not reach a verified minimum (diagnostics attached).
    """
    opt = options or SolverOptions()
    t0 = time.perf_counter()
    solver = _Solver(system, float(pressure_pa), float(temperature_k), bulk_mol, opt, standard)
    diag = {"outer_iterations": 0, "warm_start_used": False}
    if warm is not None and warm.system is system and not verify:
        polished = _polish(solver, [PhaseState(p.name, p.model, p.solution_index, p.amount_mol.copy())
                                    for p in warm.phases], warm.mu)
        if polished is not None:
            diag.update(warm_start_used=True, polished=True, verified=False)
            pure_d = solver.g0[: system.n_pure] - system.pure_stoich @ polished[1]
            return _finish(solver, *polished, [], pure_d, diag, t0)
    if warm is not None and warm.system is system:
        result = _try_warm(solver, warm)
        solver.skip_check_rt = opt.check_skip_rt
        if result is not None:
            phases, mu, found, pure_d = result
            diag["warm_start_used"] = True
            diag["polished"] = True
            return _finish(solver, phases, mu, found, pure_d, diag, t0)
    cols = solver.initial_columns(warm.phases if warm is not None and warm.system is system else None)
    mu = np.linalg.lstsq(cols.comp, cols.g, rcond=None)[0]
    previous_set = None
    setbacks = 0
    for outer in range(opt.max_outer):
        diag["outer_iterations"] = outer + 1
        lp_only = setbacks >= opt.max_setbacks
        lam, mu = _solve_lp(cols, solver.bulk, mu, solver.programme)
        if outer == 0:  # far-from-stable columns only slow the later programmes down
            keep = cols.prune(mu, lam, opt.prune_rt * R * solver.t)
            lam = lam[keep]
            solver.programme.drop(keep)
        tol = opt.check_tol if lp_only else opt.driving_force_tol
        found = solver.best_driving_forces(
            mu, iters=opt.newton_iter if lp_only else opt.colgen_newton_iter,
            skip_above=(opt.check_skip_rt if lp_only else opt.colgen_skip_rt) * R * solver.t,
        )
        added = 0
        for si, (x, dv) in enumerate(found):
            for xi, di in zip(x, dv, strict=True):
                if di < -tol:
                    added += _add_column(solver, cols, si, xi)
        phases = _phases_from_lp(solver, cols, lam, opt.merge_distance)
        if lp_only:
            if not added:
                diag["polished"] = False
                pure_d = solver.g0[: system.n_pure] - system.pure_stoich @ mu
                return _finish(solver, phases, mu, found, pure_d, diag, t0)
            continue
        current_set = sorted(ph.name for ph in phases)
        stable = current_set == previous_set
        previous_set = current_set
        if added and not stable:
            continue
        polished = _polish(solver, phases, mu)
        if polished is None:
            polished = _polish(solver, _phases_from_lp(solver, cols, lam, np.inf), mu)
        if polished is None:
            # endmembers at exactly zero leave chemical potentials undetermined (degenerate dual of a
            # bulk on a face of the liquid's composition space): seed them and let the Newton settle them
            polished = _polish(solver, _seeded(_phases_from_lp(solver, cols, lam, np.inf)), mu)
        if polished is None:
            diag["polish_failures"] = diag.get("polish_failures", 0) + 1
            setbacks += 1
            continue
        phases, mu_p = polished
        refined = _refine_active_set(solver, phases, mu_p)
        if refined is not None:
            diag["polished"] = True
            return _finish(solver, *refined, diag, t0)
        setbacks += 1
        found, _ = _check(solver, phases, mu_p)
        for si, (x, dv) in enumerate(found):
            for xi, di in zip(x, dv, strict=True):
                if di < -opt.check_tol:
                    _add_column(solver, cols, si, xi)
        for ph in phases:
            if ph.solution_index >= 0:
                _add_column(solver, cols, ph.solution_index, ph.amount_mol)
    diag.update(g_evaluations=solver.evals, wall_time_s=time.perf_counter() - t0)
    raise ConvergenceError(
        f"no verified minimum at P = {pressure_pa / 1e9:.4g} GPa, T = {temperature_k:.2f} K "
        f"after {diag['outer_iterations']} iterations",
        diag,
    )


def _refine_active_set(solver: _Solver, phases, mu, max_add: int = 6):
    """Add the phase with the most negative driving force and re-polish, until none is negative.

    Returns (phases, mu, found, pure_d) of a verified minimum, or None.
    """
    for _ in range(max_add + 1):
        found, pure_d = _check(solver, phases, mu)
        best, best_d = None, -solver.opt.check_tol
        present_pure = {ph.model for ph in phases if ph.solution_index < 0}
        for k, d in enumerate(pure_d):
            if d < best_d and solver.s.pure_names[k] not in present_pure:
                best, best_d = (-1, k), d
        for si, (x, dv) in enumerate(found):
            j = int(np.argmin(dv))
            if dv[j] < best_d:
                best, best_d = (si, x[j]), dv[j]
        if best is None:
            return phases, mu, found, pure_d
        seed = 1e-6 * min(float(ph.amount_mol.sum()) for ph in phases)
        if best[0] == -1:
            name = solver.s.pure_names[best[1]]
            new = PhaseState(name, name, -1, np.array([seed]))
        else:
            name = solver.s.solutions[best[0]].name
            new = PhaseState(name, name, best[0], seed * best[1] / best[1].sum())
        polished = _polish(solver, _name_instances([*phases, new]), mu)
        if polished is None:
            return None
        phases, mu = polished
    return None


def _add_column(solver: _Solver, cols: _Columns, si: int, x) -> int:
    comp, g = solver.solution_column(si, x)
    cols.add(comp, g, (si, x / x.sum()))
    solver.pool[si] = np.vstack([solver.pool[si], x[None] / x.sum()])
    return 1


def _try_warm(solver: _Solver, warm: Equilibrium):
    solver.probes = dict(warm.probes)
    if solver.probes:
        solver.skip_check_rt = solver.opt.warm_skip_rt
    polished = _polish(solver, [PhaseState(p.name, p.model, p.solution_index, p.amount_mol.copy())
                                for p in warm.phases], warm.mu)
    if polished is None:
        return None
    return _refine_active_set(solver, *polished)


def _finish(solver, phases, mu, found, pure_d, diag, t0):
    mass = sum(
        (solver.s.pure_stoich[solver.s.pure_names.index(ph.model)] * ph.amount_mol[0] if ph.solution_index < 0
         else solver.s.solutions[ph.solution_index].stoich.T @ ph.amount_mol) for ph in phases
    ) - solver.bulk
    diag.update(
        g_evaluations=solver.evals,
        min_absent_driving_force_j_per_mol=_absent_min(solver, phases, found, pure_d),
        mass_balance_residual=float(np.abs(mass).max() / np.abs(solver.bulk).max()),
        wall_time_s=time.perf_counter() - t0,
    )
    return Equilibrium(
        solver.s, solver.p, solver.t, solver.bulk, _name_instances(phases), mu, solver.std, diag, _probes(found),
        dict(solver.kargs),
    )
