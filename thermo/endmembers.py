"""Standard-state properties of endmembers in the Holland & Powell (2011) formalism.

References
----------
Holland T.J.B. & Powell R. (2011) An improved and extended internally
consistent thermodynamic dataset for phases of petrological interest,
involving a new equation of state for solids. J. Metamorph. Geol. 29:333-383.

Solids
    G(P,T) = H0 - T·S0 + ∫Cp dT - T∫(Cp/T) dT + ∫V dP (+ ordering terms), with
    Cp = a + bT + c/T² + d/√T (Eq. 1 of HP2011's predecessor, Holland & Powell
    1998, J. Metamorph. Geol. 16:309), and the modified Tait equation of state
    with an Einstein thermal pressure (HP2011 Eqs. 3-5):
    V = V0[1 - a(1 - (1 + b(P - Pth))^-c)],
    Pth = α0·K0·(θ/ξ0)[1/(e^(θ/T) - 1) - 1/(e^(θ/T0) - 1)],
    θ = 10636/(S0/n + 6.44), ξ0 = u0²e^u0/(e^u0 - 1)², u0 = θ/T0.
    All temperature and pressure derivatives are analytic.

Liquids
    The negative or small S0 of fitted liquid endmembers gives no meaningful
    Einstein temperature, so liquids use an isothermal modified Tait equation
    at temperature T about a 1-bar state V1(T) = V0·exp(α0(T - T0)),
    K(T) = K0[1 - β(T - T0)], with K'' = -K'/K(T) (thermo.liquid_eos, where
    the equations, their sources and the reasons for this form are given).
    Per-liquid volume and bulk-modulus factors calibrated on melting curves
    come from the dataset file liquid_volumes.toml (field ``liquid_volume``;
    docs/liquid-volumes.md). Cp is the constant ``a`` (b = c = d = 0). All
    derivatives are analytic.

Units: P [Pa], T [K], energies [J/mol], volumes [m³/mol], K [Pa].
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from thermo import kernels, liquid_eos, ordering

T_REF_K = 298.15
_EINSTEIN_A = 10636.0  # K·J/(mol K): θ = 10636/(S0/n + 6.44), HP2011 Eq. 4
_EINSTEIN_B = 6.44


@dataclass(frozen=True)
class EndmemberParameters:
    """Column arrays of endmember parameters in SI units (one entry per endmember)."""

    names: tuple[str, ...]
    is_liquid: np.ndarray
    n_atoms: np.ndarray
    h0: np.ndarray
    s0: np.ndarray
    v0: np.ndarray
    cp_a: np.ndarray
    cp_b: np.ndarray
    cp_c: np.ndarray
    cp_d: np.ndarray
    alpha0: np.ndarray
    k0_pa: np.ndarray
    k0_prime: np.ndarray
    k0_dprime_per_pa: np.ndarray
    landau: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))  # rows: tc0, smax, vmax (nan if none)
    order: np.ndarray = field(default_factory=lambda: np.zeros((0, 6)))  # rows: dh, dv, w, wv, n, factor
    #: rows: volume factor, bulk-modulus factor, rate b = δ·α0 [1/K] of K(T) = K0·exp[−b(T − T0)] of liquids
    #: (thermo.liquid_eos); empty: 1, 1 and the default δ
    liquid_volume: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))

    @property
    def liquid_volume_table(self) -> np.ndarray:
        """``liquid_volume``, or factors 1 and the default Anderson–Grüneisen rate where it is empty."""
        if self.liquid_volume.size:
            return self.liquid_volume
        delta = liquid_eos.DEFAULT_ANDERSON_GRUNEISEN_DELTA
        return np.column_stack([np.ones(len(self.names)), np.ones(len(self.names)), delta * self.alpha0])

    @cached_property
    def compiled_rows(self) -> np.ndarray:
        """The parameters as the (27, n) array of :func:`thermo.kernels.standard_state_rows`."""
        n = len(self.names)
        rows = np.full((27, n), np.nan)
        rows[0] = self.is_liquid.astype(float)
        for i, col in enumerate((self.n_atoms, self.h0, self.s0, self.v0, self.cp_a, self.cp_b, self.cp_c,
                                 self.cp_d, self.alpha0, self.k0_pa, self.k0_prime, self.k0_dprime_per_pa), 1):
            rows[i] = col
        rows[13:16] = self.liquid_volume_table.T
        if self.landau.size:
            rows[16:19] = self.landau.T
        if self.order.size:
            rows[19:25] = self.order.T
            has = ~np.isnan(self.order[:, 0])
            if has.any():
                g_ref, s_ref = ordering._reference_arrays(*[self.order[has, k] for k in range(6)])
                rows[25, has], rows[26, has] = g_ref, s_ref
        return np.ascontiguousarray(rows)

    @cached_property
    def state_groups(self) -> tuple[tuple[np.ndarray, EndmemberParameters], ...]:
        """(mask, parameters) of the solid and of the liquid endmembers (empty groups omitted)."""
        groups = []
        for mask in (~self.is_liquid, self.is_liquid):
            if mask.any():
                groups.append((mask, self.subset([n for n, m in zip(self.names, mask, strict=True) if m])))
        return tuple(groups)

    def subset(self, names: list[str] | tuple[str, ...]) -> EndmemberParameters:
        """Parameters of the named endmembers, in the order given."""
        index = [self.names.index(n) for n in names]
        kw = {k: getattr(self, k) for k in self.__dataclass_fields__ if k != "names"}
        kw = {k: (v[index] if len(v) else v) for k, v in kw.items()}
        return EndmemberParameters(names=tuple(names), **kw)


@dataclass(frozen=True)
class StandardState:
    """Molar standard-state properties, shape broadcast(P, T) + (n_endmembers,)."""

    g_j_per_mol: np.ndarray
    h_j_per_mol: np.ndarray
    s_j_per_mol_k: np.ndarray
    cp_j_per_mol_k: np.ndarray
    v_m3_per_mol: np.ndarray
    alpha_per_k: np.ndarray
    k_t_pa: np.ndarray


def cp_integrals(temperature_k, a, b, c, d):
    """Cp, ∫Cp dT and ∫Cp/T dT from 298.15 K to T for Cp = a + bT + c/T² + d/√T."""
    t, t0 = temperature_k, T_REF_K
    cp = a + b * t + c / t**2 + d / np.sqrt(t)
    int_cp = a * (t - t0) + 0.5 * b * (t**2 - t0**2) - c * (1.0 / t - 1.0 / t0) + 2.0 * d * (np.sqrt(t) - np.sqrt(t0))
    int_cp_t = (
        a * np.log(t / t0) + b * (t - t0) - 0.5 * c * (1.0 / t**2 - 1.0 / t0**2)
        - 2.0 * d * (1.0 / np.sqrt(t) - 1.0 / np.sqrt(t0))
    )
    return cp, int_cp, int_cp_t


def tait_constants(k0, kp, kpp):
    """Modified Tait constants a, b [1/Pa], c (HP2011 Eq. 3)."""
    a = (1.0 + kp) / (1.0 + kp + k0 * kpp)
    b = kp / k0 - kpp / (1.0 + kp)
    c = (1.0 + kp + k0 * kpp) / (kp**2 + kp - k0 * kpp)
    return a, b, c


def _einstein_xi(u):
    eu = np.exp(u)
    return u**2 * eu / (eu - 1.0) ** 2


def _thermal_pressure(t, theta, alpha0, k0):
    """Pth, dPth/dT, d²Pth/dT² of the Einstein thermal pressure (HP2011 Eq. 5)."""
    u0 = theta / T_REF_K
    xi0 = _einstein_xi(u0)
    u = theta / t
    eu = np.exp(u)
    pth = alpha0 * k0 * theta / xi0 * (1.0 / (eu - 1.0) - 1.0 / (np.exp(u0) - 1.0))
    xi = _einstein_xi(u)
    dpth = alpha0 * k0 * xi / xi0
    dxi_dt = xi * (2.0 / u + 1.0 - 2.0 * eu / (eu - 1.0)) * (-u / t)
    d2pth = alpha0 * k0 / xi0 * dxi_dt
    return pth, dpth, d2pth


def _solid_volume_terms(p, t, prm: EndmemberParameters):
    """∫V dP and its derivatives for solids (analytic; HP2011 Eqs. 3-5)."""
    a, b, c = tait_constants(prm.k0_pa, prm.k0_prime, prm.k0_dprime_per_pa)
    theta = _EINSTEIN_A / (prm.s0 / prm.n_atoms + _EINSTEIN_B)
    pth, dpth, d2pth = _thermal_pressure(t, theta, prm.alpha0, prm.k0_pa)
    x = 1.0 + b * (p - pth)
    y = 1.0 - b * pth
    v0 = prm.v0
    gv = p * v0 * (1.0 - a) + v0 * a * (y ** (1.0 - c) - x ** (1.0 - c)) / (b * (c - 1.0))
    v = v0 * (1.0 - a + a * x ** (-c))
    sv = -v0 * a * dpth * (y ** (-c) - x ** (-c))
    gtt = v0 * a * (d2pth * (y ** (-c) - x ** (-c)) + b * c * dpth**2 * (y ** (-c - 1.0) - x ** (-c - 1.0)))
    dv_dt = v0 * a * b * c * dpth * x ** (-c - 1.0)
    dv_dp = -v0 * a * b * c * x ** (-c - 1.0)
    return gv, sv, -t * gtt, v, dv_dt, dv_dp


def _liquid_volume_terms(p, t, prm: EndmemberParameters):
    """∫V dP and its derivatives for liquids (analytic; thermo.liquid_eos)."""
    table = prm.liquid_volume_table
    terms = liquid_eos.tait_liquid(
        p, t, prm.v0 * table[:, 0], prm.alpha0, prm.k0_pa * table[:, 1], prm.k0_prime, table[:, 2]
    )
    return terms.g, terms.s, terms.cp, terms.v, terms.dv_dt, terms.dv_dp


def standard_state(params: EndmemberParameters, pressure_pa, temperature_k) -> StandardState:
    """Standard-state properties of every endmember in ``params`` at (P, T).

    One pressure and one or a few temperatures (what the minimizer asks for) go through the
    compiled :func:`thermo.kernels.standard_state_rows`; grids through the vectorized numpy
    evaluation :func:`standard_state_grid` (the two agree to round-off; tests/thermo/test_kernels.py).

    Parameters
    ----------
    params : EndmemberParameters
        Endmember parameters (n endmembers).
    pressure_pa, temperature_k : array_like
        Pressure [Pa] and temperature [K]; broadcast against each other.

    Returns
    -------
    StandardState
        Arrays of shape ``broadcast(P, T).shape + (n,)``. Out-of-range inputs
        are not refused here (see :mod:`thermo.validity`); where the equation of
        state has no real solution the result is NaN.
    """
    if np.ndim(pressure_pa) == 0 and np.ndim(temperature_k) <= 1:
        return _standard_state_compiled(params, float(pressure_pa), temperature_k)
    return standard_state_grid(params, pressure_pa, temperature_k)


def _standard_state_compiled(params: EndmemberParameters, pressure_pa: float, temperature_k) -> StandardState:
    temps = np.ascontiguousarray(np.atleast_1d(np.asarray(temperature_k, float)))
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        g, s, cp, v, dvdt, dvdp = kernels.standard_state_rows(
            pressure_pa, temps, params.compiled_rows, T_REF_K, _EINSTEIN_A, _EINSTEIN_B, ordering.Q_GRID,
            ordering.R)
        if np.ndim(temperature_k) == 0:
            g, s, cp, v, dvdt, dvdp = g[0], s[0], cp[0], v[0], dvdt[0], dvdp[0]
            t = float(temperature_k)
        else:
            t = temps[:, None]
        return StandardState(g_j_per_mol=g, h_j_per_mol=g + t * s, s_j_per_mol_k=s, cp_j_per_mol_k=cp,
                             v_m3_per_mol=v, alpha_per_k=dvdt / v, k_t_pa=-v / dvdp)


def standard_state_grid(params: EndmemberParameters, pressure_pa, temperature_k) -> StandardState:
    """:func:`standard_state` for any broadcastable (P, T), vectorized with numpy (the reference evaluation).

    Parameters
    ----------
    params : EndmemberParameters
    pressure_pa, temperature_k : array_like
        Pressure [Pa] and temperature [K]; broadcast against each other.

    Returns
    -------
    StandardState
        Arrays of shape ``broadcast(P, T).shape + (n,)``.
    """
    p = np.asarray(pressure_pa, float)[..., None]
    t = np.asarray(temperature_k, float)[..., None]
    p, t = np.broadcast_arrays(p, t)
    shape = np.broadcast_shapes(p.shape, params.h0.shape)
    cp, icp, icpt = cp_integrals(t, params.cp_a, params.cp_b, params.cp_c, params.cp_d)
    g = params.h0 + icp - t * (params.s0 + icpt)
    s = params.s0 + icpt
    out = {k: np.zeros(shape) for k in ("gv", "sv", "cpv", "v", "dvdt", "dvdp")}
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        for mask, sub in params.state_groups:
            fn = _liquid_volume_terms if sub.is_liquid[0] else _solid_volume_terms
            vals = fn(p, t, sub)
            for key, val in zip(out, vals, strict=True):
                out[key][..., mask] = val  # broadcast on assignment
    g = g + out["gv"]
    s = s + out["sv"]
    cp = cp + out["cpv"]
    v, dvdt, dvdp = out["v"], out["dvdt"], out["dvdp"]
    for term in _ordering_terms(params, p, t, shape):
        g, s, cp, v = g + term.g, s + term.s, cp + term.cp, v + term.v
        dvdt, dvdp = dvdt + term.dv_dt, dvdp + term.dv_dp
    g = np.broadcast_to(g, shape)
    return StandardState(
        g_j_per_mol=g,
        h_j_per_mol=g + t * s,
        s_j_per_mol_k=np.broadcast_to(s, shape),
        cp_j_per_mol_k=np.broadcast_to(cp, shape),
        v_m3_per_mol=v,
        alpha_per_k=dvdt / v,
        k_t_pa=-v / dvdp,
    )


def _ordering_terms(params: EndmemberParameters, p, t, shape):
    """Landau and Bragg-Williams terms, zero-padded to the full endmember axis."""
    terms = []
    for table, fn in ((params.landau, ordering.landau), (params.order, ordering.bragg_williams)):
        if table.size == 0:
            continue
        has = ~np.isnan(table[:, 0])
        if not has.any():
            continue
        pp, tt = p[..., 0:1], t[..., 0:1]
        sub = fn(pp, tt, *[table[has, k] for k in range(table.shape[1])])
        full = {}
        for key in ("g", "s", "v", "cp", "dv_dt", "dv_dp"):
            arr = np.zeros(shape)
            arr[..., has] = getattr(sub, key)  # broadcast on assignment
            full[key] = arr
        terms.append(ordering.OrderingTerms(**full))
    return terms
