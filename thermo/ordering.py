"""Order-disorder contributions to endmember Gibbs energies.

Two models, both as used with the Holland & Powell (2011) dataset:

* Landau tricritical model for displacive transitions (quartz α-β etc.),
  Holland T.J.B. & Powell R. (1998) J. Metamorph. Geol. 16:309-343, Eqs. 8-11,
  with the simplified pressure dependence Tc = Tc0 + Vmax·P/Smax.
* Bragg-Williams convergent cation ordering (Al-Si in feldspars, Mg-Al in
  spinel), Holland T.J.B. & Powell R. (1996) Am. Mineral. 81:1413-1424: one A
  on a site of multiplicity 1 and n B on a site of multiplicity n when fully
  ordered; enthalpy (ΔH + PΔV)(1-Q) + (W + PWv)Q(1-Q); configurational
  entropy ``factor`` × ideal site mixing; G minimized over Q.

All functions are vectorized: inputs broadcast against one another. Energies in
J/mol, pressure in Pa, temperature in K, volumes in m³/mol.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.constants import R

from thermo import kernels

T_REF_K = 298.15


@dataclass(frozen=True)
class OrderingTerms:
    """Additive contributions of an ordering model (same shape as the inputs)."""

    g: np.ndarray
    s: np.ndarray
    v: np.ndarray
    cp: np.ndarray
    dv_dt: np.ndarray
    dv_dp: np.ndarray


def landau(pressure_pa, temperature_k, tc0_k, smax, vmax) -> OrderingTerms:
    """Landau tricritical excess relative to the ordered phase at 298.15 K, 1 bar.

    G_L = Smax[(T - Tc)Q² + Tc·Q⁶/3] + Smax·Tc0(Q0² - Q0⁶/3) - T·Smax·Q0² + P·Vmax·Q0²
    with Q⁴ = 1 - T/Tc below Tc (0 above), Q0⁴ = 1 - 298.15/Tc0 and
    Tc = Tc0 + Vmax·P/Smax (Holland & Powell 1998, J. Metamorph. Geol. 16:309,
    Eqs. 8-11; pressure dependence of the volume term simplified).

    Q is the equilibrium order parameter, so S = -∂G/∂T and V = ∂G/∂P follow
    from the explicit dependence only (envelope theorem); the heat capacity
    Cp = T·Smax/(2·Tc·sqrt(1 - T/Tc)) diverges at Tc as the model requires.
    """
    p, t = np.asarray(pressure_pa, float), np.asarray(temperature_k, float)
    tc = tc0_k + vmax * p / smax
    q0sq = np.sqrt(1.0 - T_REF_K / tc0_k)
    ratio = np.clip(1.0 - t / tc, 0.0, None)
    qsq = np.sqrt(ratio)
    q6 = qsq**3
    g = smax * ((t - tc) * qsq + tc * q6 / 3.0) + smax * tc0_k * (q0sq - q0sq**3 / 3.0) - t * smax * q0sq
    g = g + p * vmax * q0sq
    s = smax * (q0sq - qsq)
    v = vmax * (q0sq - qsq + q6 / 3.0)
    below = ratio > 0.0
    safe = np.where(below, ratio, 1.0)
    dqsq_dt = np.where(below, -0.5 / (tc * np.sqrt(safe)), 0.0)
    dqsq_dtc = np.where(below, 0.5 * t / (tc**2 * np.sqrt(safe)), 0.0)
    cp = -t * smax * dqsq_dt
    dv_dt = vmax * (qsq**2 - 1.0) * dqsq_dt
    dv_dp = vmax * (qsq**2 - 1.0) * dqsq_dtc * vmax / smax
    return OrderingTerms(g, s, v, cp, dv_dt, dv_dp)


#: Order-parameter grid that brackets the global minimum of the Bragg-Williams G before Newton refines it
#: (thermo.kernels.bragg_williams_order): regular to 0.99, then logarithmically closer to full order.
Q_GRID = np.concatenate([np.linspace(0.0, 0.99, 100), 1.0 - np.logspace(-2.3, -13, 24)])


def _bw_state(pressure_pa, temperature_k, dh, dv, w, wv, n, factor):
    """Q, G, ∂²G/∂Q², S_conf and ∂S_conf/∂Q at the equilibrium order (compiled; shapes broadcast)."""
    arrays = np.broadcast_arrays(
        np.asarray(pressure_pa, float), np.asarray(temperature_k, float), dh, dv, w, wv, n, factor
    )
    flat = [np.ascontiguousarray(a, dtype=float).ravel() for a in arrays]
    out = kernels.bragg_williams_state(*flat, Q_GRID, R, 40)
    return tuple(v.reshape(arrays[0].shape) for v in out)


@lru_cache(maxsize=256)
def _reference(dh, dv, w, wv, n, factor):
    """G and S of the Bragg-Williams term at 298.15 K and zero pressure (cached per parameter set)."""
    _, g0, _, s0, _ = _bw_state(0.0, T_REF_K, dh, dv, w, wv, n, factor)
    return float(g0), float(s0)


_REFERENCE_CACHE: dict[bytes, tuple[np.ndarray, np.ndarray]] = {}


def _reference_arrays(*params):
    """Elementwise cached reference G and S for (broadcast) parameter arrays."""
    arrays = np.broadcast_arrays(*[np.asarray(x, float) for x in params])
    key = b"".join(np.ascontiguousarray(a).tobytes() for a in arrays) + repr(arrays[0].shape).encode()
    hit = _REFERENCE_CACHE.get(key)
    if hit is not None:
        return hit
    if len(_REFERENCE_CACHE) > 256:
        _REFERENCE_CACHE.clear()
    _REFERENCE_CACHE[key] = _reference_arrays_uncached(arrays)
    return _REFERENCE_CACHE[key]


def _reference_arrays_uncached(arrays):
    flat = [a.ravel() for a in arrays]
    pairs = [_reference(*(float(f[i]) for f in flat)) for i in range(flat[0].size)]
    g0 = np.array([pr[0] for pr in pairs]).reshape(arrays[0].shape)
    s0 = np.array([pr[1] for pr in pairs]).reshape(arrays[0].shape)
    return g0, s0


def bragg_williams(pressure_pa, temperature_k, dh, dv, w, wv, n, factor) -> OrderingTerms:
    """Bragg-Williams ordering contribution, relative to its value at 298.15 K, 1 bar.

    The reference enthalpy and entropy at 298.15 K and 1 bar are subtracted so
    the tabulated H0 and S0 keep their meaning (phase fully equilibrated at
    298.15 K). Derivatives: S = S_conf(Q) and V = ΔV(1-Q) + Wv·Q(1-Q) by the
    envelope theorem; Cp = T·(∂S/∂Q)²/(∂²G/∂Q²) from dQ/dT = S_conf'/G_QQ
    (Holland & Powell 1996, Am. Mineral. 81:1413).
    """
    p, t = np.asarray(pressure_pa, float), np.asarray(temperature_k, float)
    q, g, gqq, s, ds = _bw_state(p, t, dh, dv, w, wv, n, factor)
    g0, s0 = _reference_arrays(dh, dv, w, wv, n, factor)
    h0 = g0 + T_REF_K * s0
    g = g - (h0 - t * s0)
    s = s - s0
    v = dv * (1.0 - q) + wv * q * (1.0 - q)
    dq_dt = ds / gqq
    gqp = -dv + wv * (1.0 - 2.0 * q)
    dq_dp = -gqp / gqq
    cp = t * ds * dq_dt
    dv_dq = -dv + wv * (1.0 - 2.0 * q)
    return OrderingTerms(g, s, v, cp, dv_dq * dq_dt, dv_dq * dq_dp)
