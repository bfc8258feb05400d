"""Pressure-temperature volume of liquid endmembers.

The liquid endmembers of the Holland & Powell (2011) dataset carry the same
volume parameters as the solids (V0, α0, K0, K′, K″), but the solids' Einstein
thermal-pressure treatment (HP2011 Eqs. 3-5) cannot be used for them:

* their fitted third-law entropies are small or negative (forsterite liquid
  S0 = −62 J/(mol K)), so θ = 10636/(S0/n + 6.44) is negative or meaningless;
* even in its classical limit, Pth = α0·K0·(T − 298.15 K), the reference
  isotherm would have to be stretched to −Pth ≈ −6 GPa at the forsterite
  melting point, beyond the Tait spinodal at −1/b ≈ −K0/(K′ + 1) ≈ −3.3 GPa.

The volume parameters of the liquids therefore describe an isothermal
compression from a 1-bar state whose volume and bulk modulus depend on
temperature (the form recalled for HP2011; see docs/liquid-volumes.md):

    V1(T) = V0·exp[α0·(T − T0)]                     volume at zero pressure
    K(T)  = K0·[V0/V1(T)]^δ = K0·exp[−δ·α0·(T − T0)]  isothermal bulk modulus at zero pressure
    V(P, T) = V1(T)·[1 − a·(1 − (1 + b·P)^(−c))]    modified Tait, HP2011 Eq. 3

with T0 = 298.15 K and the Tait constants of HP2011 Eq. 3 evaluated at K(T)
with K″ = −K′/K(T) (the dataset's rule for K″), which reduces them to

    a = 1 + K′,   b = K′(K′ + 2)/[(K′ + 1)·K(T)],   c = 1/[K′(K′ + 2)].

The temperature law of K is the Anderson–Grüneisen relation with a constant
isothermal parameter δ_T = −(∂ln K/∂T)_P/α (Anderson O.L. 1967, Phys. Rev. 163:
1107; Anderson O.L., Isaak D.G. & Oda H. 1992, Rev. Geophys. 30:57), so that
κ = dln K/dT = −δ·α0 is constant and K never reaches zero. Since
(∂α/∂P)_T = (∂K/∂T)_P/K², the expansivity then falls with compression at a
rate tied to the liquid's own α0 (∂ln α/∂ln V = δ_T at zero pressure), as
first-principles and shock data on silicate liquids show
(docs/liquid-volumes.md). The per-liquid rate
``dlnk_dt`` = δ·α0 [1/K] comes from the dataset's global δ
(``liquid_volumes.toml``). V0 and K0 here are the dataset's values times the
per-liquid factors of ``liquid_volumes.toml`` (1 where a liquid has no entry).

With y = b·P, F(y) = −K′·y + (1 + K′)·[(1 + y)^(1−c) − 1]/(1 − c),
u = V1·K/B (B = K′(K′ + 2)/(K′ + 1)), α1 = α0 and κ = dln K/dT (constant):

    ∫₀ᴾ V dP = u·F(y)                    V = V1·F′(y)           ∂V/∂P = b·V1·F″(y)
    ∂(∫V dP)/∂T = u·[(α1 + κ)·F − κ·y·F′]
    ∂²(∫V dP)/∂T² = u·[(α1 + κ)²·F − (2α1κ + κ²)·y·F′ + κ²·y²·F″]
    ∂V/∂T = V1·[α1·F′ − κ·y·F″]

using d ln u/dT = α1 + κ and dy/dT = −κ·y. All derivatives are analytic.

References
----------
Holland T.J.B. & Powell R. (2011) An improved and extended internally
consistent thermodynamic dataset for phases of petrological interest,
involving a new equation of state for solids. J. Metamorph. Geol. 29:333-383.
Anderson O.L., Isaak D.G. & Oda H. (1992) High-temperature elastic constant
data on minerals relevant to geophysics. Rev. Geophys. 30:57-90.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

T_REF_K = 298.15
#: Default Anderson–Grüneisen parameter δ_T of the liquids when a dataset states none (liquid_volumes.toml
#: states the value in use and why).
DEFAULT_ANDERSON_GRUNEISEN_DELTA = 4.0


@dataclass(frozen=True)
class LiquidVolumeTerms:
    """∫V dP from 0 to P and its derivatives; arrays of the broadcast shape of the inputs."""

    g: np.ndarray  # ∫V dP [J/mol]
    s: np.ndarray  # −∂(∫V dP)/∂T [J/(mol K)]
    cp: np.ndarray  # −T ∂²(∫V dP)/∂T² [J/(mol K)]
    v: np.ndarray  # V [m³/mol]
    dv_dt: np.ndarray  # [m³/(mol K)]
    dv_dp: np.ndarray  # [m³/(mol Pa)]


def one_bar_state(temperature_k, v0, alpha0, k0, dlnk_dt):
    """Volume V1 [m³/mol] and bulk modulus K [Pa] of a liquid at zero pressure.

    V1 = V0·exp[α0(T − T0)], K = K0·exp[−b(T − T0)] with b = ``dlnk_dt`` = δ·α0 [1/K]
    (Anderson–Grüneisen; see module docstring).
    """
    dt = np.asarray(temperature_k, float) - T_REF_K
    return v0 * np.exp(alpha0 * dt), k0 * np.exp(-dlnk_dt * dt)


def tait_liquid(pressure_pa, temperature_k, v0, alpha0, k0, k_prime, dlnk_dt):
    """Isothermal modified-Tait volume terms of liquid endmembers.

    Parameters
    ----------
    pressure_pa, temperature_k : array_like
        Pressure [Pa] (≥ 0) and temperature [K]; broadcast with the parameters.
    v0 : array_like
        Volume at 298.15 K, zero pressure [m³/mol] (already scaled per liquid).
    alpha0 : array_like
        Thermal expansivity at zero pressure [1/K].
    k0 : array_like
        Isothermal bulk modulus at 298.15 K, zero pressure [Pa] (already scaled).
    k_prime : array_like
        K′ = dK/dP [-].
    dlnk_dt : array_like
        b = δ·α0 [1/K], rate of the exponential decrease of the bulk modulus with temperature.

    Returns
    -------
    LiquidVolumeTerms
        NaN where P < −1/b (beyond the Tait spinodal).

    References
    ----------
    Holland & Powell (2011) J. Metamorph. Geol. 29:333, Eq. 3 (Tait form);
    Anderson, Isaak & Oda (1992) Rev. Geophys. 30:57 (Anderson–Grüneisen temperature law of K).
    """
    p = np.asarray(pressure_pa, float)
    t = np.asarray(temperature_k, float)
    v1, k = one_bar_state(t, v0, alpha0, k0, dlnk_dt)
    big_b = k_prime * (k_prime + 2.0) / (k_prime + 1.0)
    c = 1.0 / (k_prime * (k_prime + 2.0))
    y = big_b * p / k
    ln1y = np.log1p(y)
    f = -k_prime * y + (1.0 + k_prime) * np.expm1((1.0 - c) * ln1y) / (1.0 - c)  # F(y)
    f1 = -k_prime + (1.0 + k_prime) * np.exp(-c * ln1y)  # F'(y)
    f2 = -(1.0 + k_prime) * c * np.exp((-c - 1.0) * ln1y)  # F''(y)
    u = v1 * k / big_b
    a1 = alpha0
    kappa = -np.asarray(dlnk_dt, float)  # dlnK/dT, constant in T
    dg = u * ((a1 + kappa) * f - kappa * y * f1)
    d2g = u * ((a1 + kappa) ** 2 * f - (2.0 * a1 * kappa + kappa**2) * y * f1 + kappa**2 * y**2 * f2)
    return LiquidVolumeTerms(
        g=u * f,
        s=-dg,
        cp=-t * d2g,
        v=v1 * f1,
        dv_dt=v1 * (a1 * f1 - kappa * y * f2),
        dv_dp=v1 * f2 * big_b / k,
    )
