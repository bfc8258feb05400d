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

from thermo import solutions as sol
from thermo.endmembers import StandardState, standard_state
from thermo.errors import CompositionError, ConvergenceError
from thermo.phases import PhaseSystem, SolutionPhase, span


@dataclass(frozen=True)
class SolverOptions:
    """Tolerances and limits of :func:`equilibrate` (energies in J per mole of formula units)."""

    driving_force_tol: float = 1.0  # column generation stops (and polish starts) when no D < -tol
    colgen_newton_iter: int = 8  # Newton iterations per start while generating columns
    colgen_skip_rt: float = 3.0  # while generating columns, skip solutions whose sampled D > this x RT
    check_skip_rt: float = 12.0  # in the final check, skip Newton refinement above this x RT
    warm_skip_rt: float = 1.0  # same, when a warm start supplies last step's best compositions
    check_tol: float = 1e-3  # final minimality check: no D below -check_tol
    max_outer: int = 40
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


# ------------------------------------------------------------ solution helpers
def _mu(phase: SolutionPhase, n, g0, t, p):
    return sol.chemical_potentials(phase.model, n, g0, t, p)


def _mu_jacobian(phase: SolutionPhase, n, g0, t, p):
    """μ and ∂μ_i/∂n_j for a batch of amounts n (K, m) by complex step."""
    k, m = n.shape
    h = 1e-30 * np.maximum(np.abs(n).sum(axis=1), 1e-300)
    pert = np.repeat(n[:, None, :].astype(complex), m, axis=1)
    pert[:, np.arange(m), np.arange(m)] += 1j * h[:, None]
    mu_c = _mu(phase, pert.reshape(k * m, m), g0, t, p).reshape(k, m, m)
    jac = np.imag(mu_c) / h[:, None, None]  # [k, j, i] = dμ_i/dn_j
    return np.real(mu_c[:, 0, :]), np.swapaxes(jac, 1, 2)


def _driving_force(phase, x, g0, t, p, mu_c):
    mu = _mu(phase, x, g0, t, p)
    return np.sum(x * (mu - phase.stoich @ mu_c), axis=-1) / np.sum(x, axis=-1)


def _newton_direction(jac, g):
    """Newton step on the simplex tangent space (KKT system with Σ dx = 0), batched."""
    k, m = g.shape
    kkt = np.zeros((k, m + 1, m + 1))
    kkt[:, :m, :m] = jac
    kkt[:, :m, m] = 1.0
    kkt[:, m, :m] = 1.0
    rhs = np.concatenate([-g, np.zeros((k, 1))], axis=1)
    with np.errstate(all="ignore"):
        try:
            step = np.linalg.solve(kkt, rhs[..., None])[..., 0][:, :m]
        except np.linalg.LinAlgError:
            step = np.full((k, m), np.nan)
    pg = g - g.mean(axis=1, keepdims=True)
    bad = ~np.all(np.isfinite(step), axis=1) | (np.sum(step * g, axis=1) >= 0)
    step[bad] = -pg[bad] / (np.abs(pg[bad]).max(axis=1, keepdims=True) + 1e-300) * 0.1
    return step, pg


def _minimize_driving_force(phase, starts, g0, t, p, mu_c, iters, gtol=1e-6):
    """Batched Newton minimization of D(x) on the simplex from ``starts`` (K, m).

    Rows converge independently (projected gradient times x below ``gtol`` J/mol)
    and are then frozen. Returns compositions, driving forces and G evaluations.
    """
    x = starts / starts.sum(axis=1, keepdims=True)
    m = x.shape[1]
    d_val = _driving_force(phase, x, g0, t, p, mu_c)
    evals = len(x)
    if m == 1:
        return x, d_val, evals
    target = phase.stoich @ mu_c
    live = np.ones(len(x), bool)
    for _ in range(iters):
        idx = np.flatnonzero(live)
        if idx.size == 0:
            break
        xs = x[idx]
        mu, jac = _mu_jacobian(phase, xs, g0, t, p)
        evals += len(idx) * (m + 1)
        step, pg = _newton_direction(jac, mu - target)
        done = np.max(np.abs(pg * xs), axis=1) < gtol
        live[idx[done]] = False
        neg = step < 0
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(neg, -0.9 * xs / np.where(neg, step, -1.0), np.inf)
        alpha = np.minimum(1.0, ratio.min(axis=1))
        d_old = d_val[idx]
        # rows whose quadratic model cannot bring D below zero and that are already positive stop early
        predicted = d_old + 0.5 * np.sum((mu - target) * step, axis=1)
        hopeless = (d_old > 2.0 * R * t) & (predicted > 0.5 * d_old)
        live[idx[hopeless]] = False
        pending = ~done & ~hopeless
        trial = xs.copy()
        d_new = d_old.copy()
        for _ls in range(10):
            if not pending.any():
                break
            tr = np.clip(xs[pending] + alpha[pending, None] * step[pending], 1e-300, None)
            tr /= tr.sum(axis=1, keepdims=True)
            dn = _driving_force(phase, tr, g0, t, p, mu_c)
            evals += int(pending.sum())
            ok = dn <= d_old[pending] + 1e-13 * np.abs(d_old[pending])
            rows = np.flatnonzero(pending)
            trial[rows[ok]] = tr[ok]
            d_new[rows[ok]] = dn[ok]
            alpha[rows[~ok]] *= 0.5
            pending[rows[ok]] = False
        stalled = pending  # no decrease found: converged to round-off
        live[idx[stalled]] = False
        x[idx] = trial
        d_val[idx] = d_new
    return x, d_val, evals


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


# ------------------------------------------------------------------ LP stage
@dataclass
class _Columns:
    comp: list  # oxide composition per column (c,)
    g: list
    owner: list  # (-1, pure index) or (solution index, endmember fractions)

    def add(self, comp, g, owner):
        self.comp.append(np.asarray(comp, float))
        self.g.append(float(g))
        self.owner.append(owner)

    def prune(self, mu, lam, limit: float) -> np.ndarray:
        """Drop columns whose reduced cost G - a·μ exceeds ``limit`` (never basic ones); returns kept λ."""
        reduced = np.array(self.g) - np.array(self.comp) @ mu
        # pure phases and exact endmember columns always stay: they keep bulks on a join representable
        anchor = np.array([o[0] == -1 or np.count_nonzero(o[1]) == 1 for o in self.owner])
        keep = (reduced <= limit) | (lam > 0.0) | anchor
        for name in ("comp", "g", "owner"):
            setattr(self, name, [v for v, k in zip(getattr(self, name), keep, strict=True) if k])
        return lam[keep]


#: Tight feasibility tolerances: reduced costs (driving forces) must resolve ~1e-4 J/mol on scaled objectives.
_HIGHS_OPTIONS = {"primal_feasibility_tolerance": 1e-10, "dual_feasibility_tolerance": 1e-10}


def _solve_lp(cols: _Columns, bulk, mu_ref):
    a = np.array(cols.comp).T
    g = np.array(cols.g) - mu_ref @ a
    scale = max(1.0, float(np.abs(g).max()))
    res = linprog(g / scale, A_eq=a, b_eq=bulk, bounds=(0, None), method="highs", options=_HIGHS_OPTIONS)
    for method in ("highs-ds", "highs-ipm"):  # degenerate programmes (bulks on a join): other HiGHS solvers
        if res.status == 0:
            break
        res = linprog(g / scale, A_eq=a, b_eq=bulk, bounds=(0, None), method=method)
    if res.status == 2:
        raise CompositionError(
            "composition.oxides",
            "the bulk composition cannot be made from the candidate phases (outside the phases' chemical system)",
        )
    if res.status != 0:
        raise ConvergenceError(f"linear programme failed: {res.message}", {"lp_status": res.status})
    mu = mu_ref + scale * np.asarray(res.eqlin.marginals)
    return res.x, mu


class _Solver:
    def __init__(self, system: PhaseSystem, p, t, bulk, options: SolverOptions):
        self.s, self.p, self.t, self.opt = system, p, t, options
        self.bulk = np.asarray(bulk, float)
        self.std = standard_state(system.params, p, t)
        self.g0 = self.std.g_j_per_mol
        self.evals = 0
        self.pool = [np.vstack([_simplex_points(ph.model.size), _bulk_like(ph, self.bulk)]) for ph in system.solutions]
        self.probes: dict = {}
        self.skip_check_rt = options.check_skip_rt

    def g0_of(self, phase: SolutionPhase):
        return self.g0[phase.endmember_index]

    def solution_column(self, si, x):
        ph = self.s.solutions[si]
        x = x / x.sum()
        g = float(sol.molar_gibbs(ph.model, x[None], self.g0_of(ph), self.t, self.p)[0])
        return x @ ph.stoich, g

    def initial_columns(self, warm_phases):
        cols = _Columns([], [], [])
        for k in range(self.s.n_pure):
            cols.add(self.s.pure_stoich[k], self.g0[k], (-1, k))
        for si, ph in enumerate(self.s.solutions):
            pts = self.pool[si]
            gs = sol.molar_gibbs(ph.model, pts, self.g0_of(ph), self.t, self.p)
            self.evals += len(pts)
            for x, g in zip(pts, gs, strict=True):
                cols.add(x @ ph.stoich, g, (si, x))
            # exact pure-endmember columns (activity 1): bulks on a solution's boundary stay reachable
            for i in range(ph.model.size):
                cols.add(ph.stoich[i], self.g0_of(ph)[i], (si, np.eye(ph.model.size)[i]))
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
            d = _driving_force(ph, pool, self.g0_of(ph), self.t, self.p, mu)
            self.evals += len(pool)
            if si in self.probes:
                order = np.argsort(d)[:1]
            else:  # cold: the best sampled points and every (inset) vertex, so no corner is left unexplored
                order = np.unique(np.concatenate([np.argsort(d)[: self.opt.starts], np.arange(ph.model.size)]))
            starts, d_starts = pool[order], d[order]
            if si in self.probes:
                # warm check: last step's local minimizers are the main starts
                dp = _driving_force(ph, self.probes[si], self.g0_of(ph), self.t, self.p, mu)
                self.evals += len(dp)
                starts, d_starts = np.vstack([self.probes[si], starts]), np.concatenate([dp, d_starts])
            if d_starts.min() > skip_above and not (extra_starts and si in extra_starts):
                out.append((starts, d_starts))
                continue
            if extra_starts and si in extra_starts:
                starts = np.vstack([starts, extra_starts[si]])
            x, dv, ev = _minimize_driving_force(
                ph, starts, self.g0_of(ph), self.t, self.p, mu, iters or self.opt.newton_iter
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
def _assemblage_basis(solver: _Solver, phases: list[PhaseState]) -> np.ndarray:
    """Orthonormal basis (c, r) of the compositions the present phases span."""
    rows = [solver.s.pure_stoich[[solver.s.pure_names.index(p.model)]] if p.solution_index < 0
            else solver.s.solutions[p.solution_index].stoich for p in phases]
    return span(np.vstack(rows))


def _polish_system(solver: _Solver, phases: list[PhaseState], z, basis, mu_perp):
    """Residuals and Jacobian of the equilibrium conditions for unknowns z = (amounts, μ_reduced).

    μ = μ_perp + basis·μ_reduced: only the chemical potentials the present phases can fix are
    unknowns; the rest (μ_perp) keeps the linear programme's values, which certify minimality
    when the assemblage spans fewer components than the system.
    """
    s = solver.s
    c = basis.shape[1]
    sizes = [len(ph.amount_mol) for ph in phases]
    offs = np.concatenate([[0], np.cumsum(sizes)]).astype(int)
    nv = offs[-1]
    r = np.zeros(nv + c)
    jac = np.zeros((nv + c, nv + c))
    mu = mu_perp + basis @ z[nv:]
    mass = -solver.bulk.copy()
    for j, ph in enumerate(phases):
        sl = slice(offs[j], offs[j + 1])
        n = z[sl]
        if ph.solution_index < 0:
            k = s.pure_names.index(ph.model)
            a = s.pure_stoich[k][None]
            r[sl] = solver.g0[k] - a @ mu
        else:
            sp = s.solutions[ph.solution_index]
            a = sp.stoich
            muj, hj = _mu_jacobian(sp, n[None], solver.g0_of(sp), solver.t, solver.p)
            solver.evals += len(n) + 1
            r[sl] = muj[0] - a @ mu
            jac[sl, sl] = hj[0]
        jac[sl, nv:] = -a @ basis
        jac[nv:, sl] = (a @ basis).T
        mass += a.T @ n
    r[nv:] = basis.T @ mass
    return r, jac, offs, mass


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
    for _ in range(solver.opt.polish_iter):
        basis = _assemblage_basis(solver, phases)
        mu_r = basis.T @ mu_full
        mu_perp = mu_full - basis @ mu_r
        z = np.concatenate([*(ph.amount_mol for ph in phases), mu_r])
        r, jac, offs, mass = _polish_system(solver, phases, z, basis, mu_perp)
        nv = offs[-1]
        negligible = [j for j, ph in enumerate(phases) if ph.amount_mol.sum() < 1e-12 * scale_b]
        if negligible and len(phases) > 1:
            del phases[negligible[0]]
            continue
        if _merge_twins(solver, phases):
            continue
        if np.abs(r[:nv]).max() < 1e-7 and np.abs(mass).max() < solver.opt.mass_tol * scale_b:
            return phases, mu_full
        is_log = np.zeros(nv, bool)
        totals = np.zeros(nv)
        for j, ph in enumerate(phases):
            is_log[offs[j]: offs[j + 1]] = ph.solution_index >= 0
            totals[offs[j]: offs[j + 1]] = ph.amount_mol.sum()
        amounts = np.maximum(z[:nv], tiny)
        # endmembers below 1e-30 of their phase are negligible: frozen, their residual ignored
        frozen = is_log & (amounts < 1e-30 * totals)
        if np.abs(np.where(frozen, 0.0, r[:nv])).max() < 1e-7 and np.abs(mass).max() < solver.opt.mass_tol * scale_b:
            return phases, mu_full
        jac[:, :nv][:, is_log] *= amounts[is_log]
        act = np.concatenate([~frozen, np.ones(len(mu_r), bool)])
        dz = np.zeros(len(z))
        try:
            dz[act] = np.linalg.solve(jac[np.ix_(act, act)], -r[act])
        except np.linalg.LinAlgError:
            return None
        if not np.all(np.isfinite(dz)):
            return None
        step = dz[:nv]
        step[is_log] = np.clip(step[is_log], -4.0, 2.0)
        alpha = 1.0
        pure_idx = np.flatnonzero(~is_log)
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
        for j, ph in enumerate(phases):
            sl = slice(offs[j], offs[j + 1])
            if ph.solution_index >= 0:
                ph.amount_mol = amounts[sl] * np.exp(alpha * step[sl])
            else:
                ph.amount_mol = amounts[sl] + alpha * step[sl]
        mu_full = mu_perp + basis @ (mu_r + alpha * dz[nv:])
        totals = np.array([ph.amount_mol.sum() for ph in phases])
        if len(phases) > 1 and totals.min() < 1e-13 * scale_b:
            del phases[int(np.argmin(totals))]
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
        keep = []
        for j in np.argsort(dv):
            if all(np.abs(x[j] - x[k]).max() > 1e-3 for k in keep):
                keep.append(j)
        out[si] = x[keep[:4]]
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

    Raises
    ------
    CompositionError
        If the bulk cannot be made from the candidate phases.
    ConvergenceError
        If the solver does not reach a verified minimum (diagnostics attached).
    """
    opt = options or SolverOptions()
    t0 = time.perf_counter()
    solver = _Solver(system, float(pressure_pa), float(temperature_k), bulk_mol, opt)
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
    mu = np.linalg.lstsq(np.array(cols.comp), np.array(cols.g), rcond=None)[0]
    previous_set = None
    setbacks = 0
    for outer in range(opt.max_outer):
        diag["outer_iterations"] = outer + 1
        lp_only = setbacks >= opt.max_setbacks
        lam, mu = _solve_lp(cols, solver.bulk, mu)
        if outer == 0:  # far-from-stable columns only slow the later programmes down
            lam = cols.prune(mu, lam, opt.prune_rt * R * solver.t)
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
        solver.s, solver.p, solver.t, solver.bulk, _name_instances(phases), mu, solver.std, diag, _probes(found)
    )
