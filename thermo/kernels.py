"""Compiled inner loops of the minimizer (numba): solution chemical potentials, their exact
Jacobian, driving forces and the batched Newton minimization of a driving force on the simplex.

The model is the one of :mod:`thermo.solutions` (same parameters, same floors), written row by
row so that numba compiles it to machine code; the minimizer calls these kernels thousands of
times per equilibrium, where numpy's per-call overhead on arrays of 5–12 entries dominated.

Chemical potentials, for endmember amounts n (any positive scale, N = Σ n_k):

* ideal, ``sites`` (Powell & Holland 1993, Am. Mineral. 78:1174):
  ln a_i = ln k_i + Σ_c m_c ν_ic ln x_c with site-species fractions x_c = Σ_k n_k ν_kc / N, so
  ∂ln a_i/∂n_j = (1/N) Σ_c m_c ν_ic (ν_jc − x_c)/x_c;
* ideal, ``units`` (mixing units u_i): ln a_i = u_i ln X_i, X_i = u_i n_i / U, U = Σ u_k n_k, so
  ∂ln a_i/∂n_j = u_i (δ_ij/n_i − u_j/U);
* excess, asymmetric van Laar (Holland & Powell 2003, Contrib. Mineral. Petrol. 145:492):
  with φ_k = α_k n_k / A, A = Σ α_k n_k, C = B + Bᵀ, B_ij = 2W_ij/(α_i + α_j) (i < j) and
  Q = φᵀBφ = ½ φᵀCφ: μ_l = α_l((Cφ)_l − Q), and
  ∂μ_l/∂n_j = α_l α_j / A · (C_lj − (Cφ)_j − (Cφ)_l + 2Q).

Logarithms of fractions below 1e-300 are floored (their derivative is zero), as in
:func:`thermo.solutions.ideal_log_activity`.
"""

from __future__ import annotations

import numpy as np
from numba import njit

_FLOOR = 1e-300
_LOG_FLOOR = float(np.log(1e-300))


@njit(cache=True)
def _mu_row(x, units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt, mu, jac, want_jac):
    """μ (J/mol) of one composition ``x`` (m,) into ``mu``; ∂μ_i/∂n_j into ``jac`` if ``want_jac``."""
    m = x.shape[0]
    n_tot = 0.0
    for i in range(m):
        n_tot += x[i]
    if units_kind:
        u_tot = 0.0
        for i in range(m):
            u_tot += units[i] * x[i]
        for i in range(m):
            xi = units[i] * x[i] / u_tot
            alive = xi > _FLOOR
            mu[i] = g0[i] + rt * units[i] * (np.log(xi) if alive else _LOG_FLOOR)
            if want_jac:
                for j in range(m):
                    if alive:
                        v = -units[j] / u_tot
                        if i == j:
                            v += 1.0 / x[i]
                        jac[i, j] = rt * units[i] * v
                    else:
                        jac[i, j] = 0.0
    else:
        nc = occ.shape[1]
        xs = np.empty(nc)
        lx = np.empty(nc)
        for c in range(nc):
            s = 0.0
            for k in range(m):
                s += x[k] * occ[k, c]
            xs[c] = s / n_tot
            lx[c] = np.log(xs[c]) if xs[c] > _FLOOR else _LOG_FLOOR
        for i in range(m):
            s = log_k[i]
            for c in range(nc):
                s += om[i, c] * lx[c]
            mu[i] = g0[i] + rt * s
            if want_jac:
                for j in range(m):
                    v = 0.0
                    for c in range(nc):
                        if xs[c] > _FLOOR and om[i, c] != 0.0:
                            v += om[i, c] * (occ[j, c] - xs[c]) / xs[c]
                    jac[i, j] = rt * v / n_tot
    if has_ex:
        a_tot = 0.0
        for k in range(m):
            a_tot += alpha[k] * x[k]
        phi = np.empty(m)
        for k in range(m):
            phi[k] = alpha[k] * x[k] / a_tot
        cphi = np.zeros(m)
        quad = 0.0
        for i in range(m):
            s = 0.0
            for k in range(m):
                s += cmat[i, k] * phi[k]
            cphi[i] = s
            quad += 0.5 * phi[i] * s
        for i in range(m):
            mu[i] += alpha[i] * (cphi[i] - quad)
            if want_jac:
                for j in range(m):
                    jac[i, j] += alpha[i] * alpha[j] / a_tot * (cmat[i, j] - cphi[j] - cphi[i] + 2.0 * quad)


@njit(cache=True)
def chemical_potentials(xb, units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt):
    """μ (K, m) for compositions ``xb`` (K, m)."""
    k_rows, m = xb.shape
    out = np.empty((k_rows, m))
    jac = np.empty((m, m))
    for r in range(k_rows):
        _mu_row(xb[r], units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt, out[r], jac, False)
    return out


@njit(cache=True)
def chemical_potentials_jacobian(xb, units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt):
    """μ (K, m) and ∂μ_i/∂n_j (K, m, m) for endmember amounts ``xb`` (K, m)."""
    k_rows, m = xb.shape
    out = np.empty((k_rows, m))
    jac = np.empty((k_rows, m, m))
    for r in range(k_rows):
        _mu_row(xb[r], units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt, out[r], jac[r], True)
    return out, jac


@njit(cache=True)
def _d_row(x, units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt, target, mu, jac):
    _mu_row(x, units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt, mu, jac, False)
    s = 0.0
    n = 0.0
    for i in range(x.shape[0]):
        s += x[i] * (mu[i] - target[i])
        n += x[i]
    return s / n


@njit(cache=True)
def driving_forces(xb, units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt, target):
    """D = Σ x_i(μ_i − target_i)/Σ x_i [J/mol] for compositions ``xb`` (K, m)."""
    k_rows, m = xb.shape
    out = np.empty(k_rows)
    mu = np.empty(m)
    jac = np.empty((m, m))
    for r in range(k_rows):
        out[r] = _d_row(xb[r], units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt, target, mu, jac)
    return out


@njit(cache=True)
def _kkt_step(jac, g, step):
    """Solve [[J, 1], [1ᵀ, 0]]·[s; λ] = [−g; 0] by Gaussian elimination with partial pivoting.

    Returns False on an exactly singular system (as LAPACK's gesv would).
    """
    m = g.shape[0]
    a = np.zeros((m + 1, m + 2))
    for i in range(m):
        for j in range(m):
            a[i, j] = jac[i, j]
        a[i, m] = 1.0
        a[m, i] = 1.0
        a[i, m + 1] = -g[i]
    size = m + 1
    for col in range(size):
        piv = col
        best = abs(a[col, col])
        for r in range(col + 1, size):
            if abs(a[r, col]) > best:
                best = abs(a[r, col])
                piv = r
        if best == 0.0:
            return False
        if piv != col:
            for j in range(size + 1):
                tmp = a[col, j]
                a[col, j] = a[piv, j]
                a[piv, j] = tmp
        for r in range(col + 1, size):
            f = a[r, col] / a[col, col]
            if f != 0.0:
                for j in range(col, size + 1):
                    a[r, j] -= f * a[col, j]
    sol = np.empty(size)
    for r in range(size - 1, -1, -1):
        s = a[r, size]
        for j in range(r + 1, size):
            s -= a[r, j] * sol[j]
        sol[r] = s / a[r, r]
    for i in range(m):
        step[i] = sol[i]
    return True


@njit(cache=True)
def minimize_driving_force(starts, units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt, target,
                           iters, gtol):
    """Newton minimization of D(x) on the composition simplex from each row of ``starts`` (K, m).

    Each row: Newton step of the KKT system with Σ dx = 0 (exact Hessian ∂μ/∂n), a projected-
    gradient step if that is not a descent direction, a fraction-to-boundary rule (0.9) and up
    to ten halvings until D does not increase. A row stops when |x·(g − ḡ)| < ``gtol`` J/mol,
    when no decrease is found (round-off), or when it is hopeless: D > 2RT and the quadratic
    model cannot halve it. Returns (x (K, m), D (K,), G evaluations).
    """
    k_rows, m = starts.shape
    x = np.empty((k_rows, m))
    for r in range(k_rows):
        s = 0.0
        for i in range(m):
            s += starts[r, i]
        for i in range(m):
            x[r, i] = starts[r, i] / s
    mu = np.empty(m)
    jac = np.empty((m, m))
    d_val = np.empty(k_rows)
    for r in range(k_rows):
        d_val[r] = _d_row(x[r], units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt, target, mu, jac)
    evals = k_rows
    if m == 1:
        return x, d_val, evals
    g = np.empty(m)
    pg = np.empty(m)
    step = np.empty(m)
    trial = np.empty(m)
    for r in range(k_rows):
        xr = x[r]
        for _ in range(iters):
            _mu_row(xr, units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt, mu, jac, True)
            evals += m + 1
            g_mean = 0.0
            for i in range(m):
                g[i] = mu[i] - target[i]
                g_mean += g[i] / m
            ok = _kkt_step(jac, g, step)
            descent = 0.0
            finite = True
            for i in range(m):
                pg[i] = g[i] - g_mean
                descent += step[i] * g[i]
                if not np.isfinite(step[i]):
                    finite = False
            if not ok or not finite or descent >= 0.0:
                pmax = 0.0
                for i in range(m):
                    pmax = max(pmax, abs(pg[i]))
                descent = 0.0
                for i in range(m):
                    step[i] = -pg[i] / (pmax + 1e-300) * 0.1
                    descent += step[i] * g[i]
            resid = 0.0
            for i in range(m):
                resid = max(resid, abs(pg[i] * xr[i]))
            if resid < gtol:
                break
            d_old = d_val[r]
            if d_old > 2.0 * rt and d_old + 0.5 * descent > 0.5 * d_old:
                break
            alpha_s = 1.0
            for i in range(m):
                if step[i] < 0.0:
                    alpha_s = min(alpha_s, -0.9 * xr[i] / step[i])
            accepted = False
            for _ls in range(10):
                tot = 0.0
                for i in range(m):
                    trial[i] = max(xr[i] + alpha_s * step[i], 1e-300)
                    tot += trial[i]
                for i in range(m):
                    trial[i] /= tot
                dn = _d_row(trial, units_kind, om, occ, log_k, units, alpha, cmat, has_ex, g0, rt, target, mu, jac)
                evals += 1
                if dn <= d_old + 1e-13 * abs(d_old):
                    for i in range(m):
                        xr[i] = trial[i]
                    d_val[r] = dn
                    accepted = True
                    break
                alpha_s *= 0.5
            if not accepted:
                break
    return x, d_val, evals


@njit(cache=True)
def distinct_rows(x, tol, max_keep):
    """Indices of up to ``max_keep`` rows of ``x`` (best first) not within ``tol`` (max norm) of a kept row."""
    keep = np.empty(min(max_keep, x.shape[0]), np.int64)
    count = 0
    for j in range(x.shape[0]):
        far = True
        for k in range(count):
            d = 0.0
            for i in range(x.shape[1]):
                d = max(d, abs(x[j, i] - x[keep[k], i]))
            if d <= tol:
                far = False
                break
        if far:
            keep[count] = j
            count += 1
            if count == max_keep:
                break
    return keep[:count]


# ----------------------------------------------------------------- Bragg-Williams order parameter
@njit(cache=True)
def _xlogx(x):
    return x * np.log(x) if x > 0.0 else 0.0


@njit(cache=True)
def _bw_entropy(q, n, factor, r_gas):
    """Configurational entropy of the Bragg-Williams model and its first two Q-derivatives at order ``q``."""
    xa1 = (1.0 + n * q) / (1.0 + n)
    xb1 = n * (1.0 - q) / (1.0 + n)
    xa2 = (1.0 - q) / (1.0 + n)
    xb2 = (n + q) / (1.0 + n)
    s = -r_gas * factor * (_xlogx(xa1) + _xlogx(xb1) + n * (_xlogx(xa2) + _xlogx(xb2)))
    k = n / (1.0 + n)
    ds = -r_gas * factor * k * (np.log(xa1 / xb1) - np.log(xa2 / xb2))
    d2s = -r_gas * factor * k * (k / xa1 + k / xb1 + 1.0 / ((1.0 + n) * xa2) + 1.0 / ((1.0 + n) * xb2))
    return s, ds, d2s


@njit(cache=True)
def _bw_terms(q, p, t, dh, dv, w, wv, n, factor, r_gas):
    """G, ∂G/∂Q, ∂²G/∂Q² of the Bragg-Williams model at one point (Holland & Powell 1996, Am. Mineral. 81:1413):
    G = (ΔH + PΔV)(1 − Q) + (W + PW_V)Q(1 − Q) − T·S_conf(Q)."""
    s, ds, d2s = _bw_entropy(q, n, factor, r_gas)
    eh = dh + p * dv
    ew = w + p * wv
    g = eh * (1.0 - q) + ew * q * (1.0 - q) - t * s
    gq = -eh + ew * (1.0 - 2.0 * q) - t * ds
    gqq = -2.0 * ew - t * d2s
    return g, gq, gqq


@njit(cache=True)
def bragg_williams_order(p, t, dh, dv, w, wv, n, factor, q_grid, r_gas, iterations):
    """Equilibrium order parameter Q for flat parameter arrays: the grid ``q_grid`` brackets the
    global minimum of G(Q), safeguarded Newton steps on ∂G/∂Q (bisection when a step leaves the
    bracket) refine it until |ΔQ| ≤ 1e-13 (Holland & Powell 1996, Am. Mineral. 81:1413)."""
    size = p.shape[0]
    out = np.empty(size)
    ng = q_grid.shape[0]
    for e in range(size):
        args = (p[e], t[e], dh[e], dv[e], w[e], wv[e], n[e], factor[e], r_gas)
        best = np.inf
        idx = 0
        for j in range(ng):
            g, _, _ = _bw_terms(q_grid[j], *args)
            if g < best:
                best = g
                idx = j
        lo = q_grid[max(idx - 1, 0)]
        hi = q_grid[min(idx + 1, ng - 1)]
        q = q_grid[idx]
        for _ in range(iterations):
            _, gq, gqq = _bw_terms(q, *args)
            if gq < 0.0:
                lo = q
            else:
                hi = q
            newton = q - gq / gqq if gqq != 0.0 else np.nan
            if np.isfinite(newton) and lo <= newton <= hi:
                q_new = newton
            else:
                q_new = 0.5 * (lo + hi)
            converged = abs(q_new - q) <= 1e-13
            q = q_new
            if converged:
                break
        out[e] = q
    return out


@njit(cache=True)
def bragg_williams_state(p, t, dh, dv, w, wv, n, factor, q_grid, r_gas, iterations):
    """Equilibrium Q and, at it, G, ∂²G/∂Q², S_conf and ∂S_conf/∂Q (flat arrays; see _bw_terms)."""
    q = bragg_williams_order(p, t, dh, dv, w, wv, n, factor, q_grid, r_gas, iterations)
    size = q.shape[0]
    g, gqq, s, ds = np.empty(size), np.empty(size), np.empty(size), np.empty(size)
    for e in range(size):
        g[e], _, gqq[e] = _bw_terms(q[e], p[e], t[e], dh[e], dv[e], w[e], wv[e], n[e], factor[e], r_gas)
        s[e], ds[e], _ = _bw_entropy(q[e], n[e], factor[e], r_gas)
    return q, g, gqq, s, ds


def warm_up() -> None:
    """Compile (or load from numba's on-disk cache) every kernel with the argument types the minimizer uses.

    Servers call this once in the parent process before forking workers, so no request pays the
    compilation (~20 s on a fresh install, ~0.5 s from the cache).
    """
    x = np.array([[0.6, 0.4]])
    occ = np.ascontiguousarray(np.eye(2))
    vec = np.zeros(2)
    cmat = np.zeros((2, 2))
    for units_kind in (False, True):
        args = (units_kind, occ, occ, vec, np.ones(2), np.ones(2), cmat, False, vec, 8.314 * 1000.0)
        chemical_potentials(x, *args)
        chemical_potentials_jacobian(x, *args)
        driving_forces(x, *args, vec)
        minimize_driving_force(x, *args, vec, 2, 1e-6)
    distinct_rows(x, 1e-3, 4)
    one = np.ones(1)
    bragg_williams_order(one * 1e5, one * 1000.0, one * 1e4, one * 0.0, one * 1e3, one * 0.0, one, one,
                         np.linspace(0.0, 0.99, 5), 8.314, 2)
    bragg_williams_state(one * 1e5, one * 1000.0, one * 1e4, one * 0.0, one * 1e3, one * 0.0, one, one,
                         np.linspace(0.0, 0.99, 5), 8.314, 2)
    rows = np.ones((27, 1))
    rows[16:25] = np.nan
    standard_state_rows(1e5, np.array([1000.0]), rows, 298.15, 10636.0, 6.44, np.linspace(0.0, 0.99, 5), 8.314)


# ----------------------------------------------------------------- standard state at one pressure
@njit(cache=True, error_model="numpy")
def standard_state_rows(p, temps, prm, t_ref, einstein_a, einstein_b, q_grid, r_gas):
    """G, S, Cp, V, ∂V/∂T, ∂V/∂P (each (len(temps), n)) of n endmembers at pressure ``p`` [Pa].

    The formulas of :mod:`thermo.endmembers`, :mod:`thermo.liquid_eos` and :mod:`thermo.ordering`
    (Holland & Powell 2011, J. Metamorph. Geol. 29:333, Eqs. 3-5; Holland & Powell 1998, J.
    Metamorph. Geol. 16:309, Eqs. 8-11; Holland & Powell 1996, Am. Mineral. 81:1413), element by
    element, in the same order of operations. ``prm`` (27, n) rows: is_liquid, n_atoms, h0, s0, v0,
    cp a, b, c, d, α0, K0, K′, K″, liquid volume factor, liquid K factor, liquid dlnK/dT rate, Landau Tc0,
    Smax, Vmax (NaN: none), Bragg-Williams ΔH, ΔV, W, Wv, n, factor (NaN: none), and its reference
    G and S at 298.15 K and 1 bar. NaN where an equation of state has no real solution.
    """
    n = prm.shape[1]
    k = temps.shape[0]
    g_out, s_out, cp_out = np.empty((k, n)), np.empty((k, n)), np.empty((k, n))
    v_out, dvdt_out, dvdp_out = np.empty((k, n)), np.empty((k, n)), np.empty((k, n))
    one = np.ones(1)
    for it in range(k):
        t = temps[it]
        for e in range(n):
            h0, s0, v0 = prm[2, e], prm[3, e], prm[4, e]
            a, b, c, d = prm[5, e], prm[6, e], prm[7, e], prm[8, e]
            cp = a + b * t + c / t**2 + d / np.sqrt(t)
            icp = (a * (t - t_ref) + 0.5 * b * (t**2 - t_ref**2) - c * (1.0 / t - 1.0 / t_ref)
                   + 2.0 * d * (np.sqrt(t) - np.sqrt(t_ref)))
            icpt = (a * np.log(t / t_ref) + b * (t - t_ref) - 0.5 * c * (1.0 / t**2 - 1.0 / t_ref**2)
                    - 2.0 * d * (1.0 / np.sqrt(t) - 1.0 / np.sqrt(t_ref)))
            g = h0 + icp - t * (s0 + icpt)
            s = s0 + icpt
            alpha0, k0, kp, kpp = prm[9, e], prm[10, e], prm[11, e], prm[12, e]
            if prm[0, e] > 0.5:  # liquid: isothermal Tait about the 1-bar state (thermo.liquid_eos)
                v0l, k0l, rate = v0 * prm[13, e], k0 * prm[14, e], prm[15, e]
                dt = t - t_ref
                kk = k0l * np.exp(-rate * dt)
                v1 = v0l * np.exp(alpha0 * dt)
                big_b = kp * (kp + 2.0) / (kp + 1.0)
                cc = 1.0 / (kp * (kp + 2.0))
                y = big_b * p / kk
                ln1y = np.log1p(y)
                f = -kp * y + (1.0 + kp) * np.expm1((1.0 - cc) * ln1y) / (1.0 - cc)
                f1 = -kp + (1.0 + kp) * np.exp(-cc * ln1y)
                f2 = -(1.0 + kp) * cc * np.exp((-cc - 1.0) * ln1y)
                u = v1 * kk / big_b
                kappa = -rate
                dg = u * ((alpha0 + kappa) * f - kappa * y * f1)
                d2g = u * ((alpha0 + kappa) ** 2 * f - (2.0 * alpha0 * kappa + kappa**2) * y * f1
                           + kappa**2 * y**2 * f2)
                gv, sv, cpv = u * f, -dg, -t * d2g
                v = v1 * f1
                dvdt = v1 * (alpha0 * f1 - kappa * y * f2)
                dvdp = v1 * f2 * big_b / kk
            else:  # solid: modified Tait with Einstein thermal pressure (HP2011 Eqs. 3-5)
                ta = (1.0 + kp) / (1.0 + kp + k0 * kpp)
                tb = kp / k0 - kpp / (1.0 + kp)
                tc = (1.0 + kp + k0 * kpp) / (kp**2 + kp - k0 * kpp)
                theta = einstein_a / (s0 / prm[1, e] + einstein_b)
                u0 = theta / t_ref
                eu0 = np.exp(u0)
                xi0 = u0**2 * eu0 / (eu0 - 1.0) ** 2
                u = theta / t
                eu = np.exp(u)
                pth = alpha0 * k0 * theta / xi0 * (1.0 / (eu - 1.0) - 1.0 / (np.exp(u0) - 1.0))
                xi = u**2 * eu / (eu - 1.0) ** 2
                dpth = alpha0 * k0 * xi / xi0
                dxi_dt = xi * (2.0 / u + 1.0 - 2.0 * eu / (eu - 1.0)) * (-u / t)
                d2pth = alpha0 * k0 / xi0 * dxi_dt
                x = 1.0 + tb * (p - pth)
                yy = 1.0 - tb * pth
                gv = p * v0 * (1.0 - ta) + v0 * ta * (yy ** (1.0 - tc) - x ** (1.0 - tc)) / (tb * (tc - 1.0))
                v = v0 * (1.0 - ta + ta * x ** (-tc))
                sv = -v0 * ta * dpth * (yy ** (-tc) - x ** (-tc))
                gtt = v0 * ta * (d2pth * (yy ** (-tc) - x ** (-tc))
                                 + tb * tc * dpth**2 * (yy ** (-tc - 1.0) - x ** (-tc - 1.0)))
                cpv = -t * gtt
                dvdt = v0 * ta * tb * tc * dpth * x ** (-tc - 1.0)
                dvdp = -v0 * ta * tb * tc * x ** (-tc - 1.0)
            g += gv
            s += sv
            cp += cpv
            tc0 = prm[16, e]
            if not np.isnan(tc0):  # Landau tricritical term (HP1998 Eqs. 8-11)
                smax, vmax = prm[17, e], prm[18, e]
                tcp = tc0 + vmax * p / smax
                q0sq = np.sqrt(1.0 - t_ref / tc0)
                ratio = max(1.0 - t / tcp, 0.0)
                qsq = np.sqrt(ratio)
                q6 = qsq**3
                gl = smax * ((t - tcp) * qsq + tcp * q6 / 3.0) + smax * tc0 * (q0sq - q0sq**3 / 3.0) - t * smax * q0sq
                gl = gl + p * vmax * q0sq
                if ratio > 0.0:
                    dqsq_dt = -0.5 / (tcp * np.sqrt(ratio))
                    dqsq_dtc = 0.5 * t / (tcp**2 * np.sqrt(ratio))
                else:
                    dqsq_dt = 0.0
                    dqsq_dtc = 0.0
                g += gl
                s += smax * (q0sq - qsq)
                cp += -t * smax * dqsq_dt
                v += vmax * (q0sq - qsq + q6 / 3.0)
                dvdt += vmax * (qsq**2 - 1.0) * dqsq_dt
                dvdp += vmax * (qsq**2 - 1.0) * dqsq_dtc * vmax / smax
            dh = prm[19, e]
            if not np.isnan(dh):  # Bragg-Williams term relative to 298.15 K, 1 bar (HP1996)
                dv, w, wv, nn, fac = prm[20, e], prm[21, e], prm[22, e], prm[23, e], prm[24, e]
                q = bragg_williams_order(one * p, one * t, one * dh, one * dv, one * w, one * wv, one * nn,
                                         one * fac, q_grid, r_gas, 40)[0]
                gb, _, gqq = _bw_terms(q, p, t, dh, dv, w, wv, nn, fac, r_gas)
                sb, dsb, _ = _bw_entropy(q, nn, fac, r_gas)
                g_ref, s_ref = prm[25, e], prm[26, e]
                h_ref = g_ref + t_ref * s_ref
                dq_dt = dsb / gqq
                dv_dq = -dv + wv * (1.0 - 2.0 * q)
                dq_dp = -dv_dq / gqq
                g += gb - (h_ref - t * s_ref)
                s += sb - s_ref
                cp += t * dsb * dq_dt
                v += dv * (1.0 - q) + wv * q * (1.0 - q)
                dvdt += dv_dq * dq_dt
                dvdp += dv_dq * dq_dp
            g_out[it, e], s_out[it, e], cp_out[it, e] = g, s, cp
            v_out[it, e], dvdt_out[it, e], dvdp_out[it, e] = v, dvdt, dvdp
    return g_out, s_out, cp_out, v_out, dvdt_out, dvdp_out
