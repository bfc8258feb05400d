"""Reference driving-force minimizer for tests: numpy, complex-step derivatives, no compiled code.

The minimizer's compiled kernels (:mod:`thermo.kernels`) use analytic Jacobians; this module
keeps the earlier, independent route — chemical potentials from :mod:`thermo.solutions` and
exact complex-step derivatives (Squire & Trapp 1998, SIAM Rev. 40:110) — so that tests probe
the minimizer's answers and the kernels with code they do not share.
"""

from __future__ import annotations

import numpy as np
from scipy.constants import R

from thermo import solutions as sol
from thermo.phases import SolutionPhase


def mu(phase: SolutionPhase, n, g0, t, p):
    return sol.chemical_potentials(phase.model, n, g0, t, p)


def mu_jacobian(phase: SolutionPhase, n, g0, t, p):
    """μ and ∂μ_i/∂n_j for a batch of amounts n (K, m) by complex step."""
    k, m = n.shape
    h = 1e-30 * np.maximum(np.abs(n).sum(axis=1), 1e-300)
    pert = np.repeat(n[:, None, :].astype(complex), m, axis=1)
    pert[:, np.arange(m), np.arange(m)] += 1j * h[:, None]
    mu_c = mu(phase, pert.reshape(k * m, m), g0, t, p).reshape(k, m, m)
    jac = np.imag(mu_c) / h[:, None, None]  # [k, j, i] = dμ_i/dn_j
    return np.real(mu_c[:, 0, :]), np.swapaxes(jac, 1, 2)


def driving_force(phase, x, g0, t, p, mu_c):
    mu_x = mu(phase, x, g0, t, p)
    return np.sum(x * (mu_x - phase.stoich @ mu_c), axis=-1) / np.sum(x, axis=-1)


def newton_direction(jac, g):
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


def minimize_driving_force(phase, starts, g0, t, p, mu_c, iters, gtol=1e-6):
    """Batched Newton minimization of D(x) on the simplex from ``starts`` (K, m).

    Rows converge independently (projected gradient times x below ``gtol`` J/mol)
    and are then frozen. Returns compositions, driving forces and G evaluations.
    """
    x = starts / starts.sum(axis=1, keepdims=True)
    m = x.shape[1]
    d_val = driving_force(phase, x, g0, t, p, mu_c)
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
        mu, jac = mu_jacobian(phase, xs, g0, t, p)
        evals += len(idx) * (m + 1)
        step, pg = newton_direction(jac, mu - target)
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
            dn = driving_force(phase, tr, g0, t, p, mu_c)
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
