"""Thermodynamic identities of the standard-state properties, for every endmember.

On 300 random (P, T) points over 0-25 GPa and 500-3000 K:
H = G + TS; S = −∂G/∂T; V = ∂G/∂P; Cp = T ∂S/∂T; α = (1/V) ∂V/∂T;
K_T = −V ∂P/∂V; and a vectorized call equals scalar calls elementwise.

Derivatives are 5-point central differences, f′ ≈ [f(x−2h) − 8f(x−h) +
8f(x+h) − f(x+2h)]/(12h), whose truncation error is O(h⁴). Steps: h_T = 0.5 K
and h_P = 1 MPa. Round-off in a difference of G (|G| up to ~10⁷ J/mol, relative
precision 2·10⁻¹⁶) is then ~10⁻⁹ J/(mol K) in S and ~10⁻¹⁵ m³/mol in V, far
below the 10⁻⁶ relative tolerance, while the O(h⁴) truncation is ~10⁻¹⁰
relative for these smooth functions.

Two cases need care:
- Liquids: their temperature derivatives of ∫V dP are themselves 5-point
  differences (thermo.endmembers), and the Tait integral for liquids is a
  difference of two terms ~10× larger than the result (a = 1 + K′), so their S
  carries ~10⁻⁹-relative noise; Cp = T ∂S/∂T of that noise is ~10⁻⁶. Liquid Cp
  is held to 3·10⁻⁶, everything else to 10⁻⁶.
- Order-disorder transitions: the Landau Cp diverges at Tc (Holland & Powell
  1998, J. Metamorph. Geol. 16:309) and a Bragg-Williams transition has a Cp
  step at its critical temperature 2(W + P·Wv)/(R·f·(n+1)) (mean-field result
  for the model of Holland & Powell 1996, Am. Mineral. 81:1413). Points within
  50 K of either are skipped (a difference stencil straddling a singularity
  measures the stencil, not the model); at least 200 points remain per
  endmember.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.constants import R

from thermo.dataset import load_dataset
from thermo.endmembers import standard_state

N_POINTS = 300
MIN_POINTS = 200
H_T_K = 0.5
H_P_PA = 1.0e6
RTOL = 1e-6
RTOL_LIQUID_CP = 3e-6
EXCLUSION_K = 50.0
#: Absolute floor for α, whose analytic value is exactly 0 for quartz above Tc (α0 = 0): 1e-6 of 1e-5 /K.
ALPHA_ATOL_PER_K = 1e-11

pytestmark = pytest.mark.slow  # ~20 evaluations of all 55 endmembers on 300 points (Bragg-Williams dominates)


@pytest.fixture(scope="module")
def params():
    return load_dataset().endmembers


@pytest.fixture(scope="module")
def points():
    rng = np.random.default_rng(20260511)
    return rng.uniform(0.0, 25.0e9, N_POINTS), rng.uniform(500.0, 3000.0, N_POINTS)


def _near_transition(params, pressure_pa, temperature_k) -> np.ndarray:
    """(n_points, n_endmembers) mask of points within EXCLUSION_K of an ordering transition."""
    p, t = pressure_pa[:, None], temperature_k[:, None]
    tc0, smax, vmax = params.landau.T
    with np.errstate(invalid="ignore"):
        landau_tc = tc0 + vmax * p / smax
    _dh, _dv, w, wv, n, factor = params.order.T
    with np.errstate(invalid="ignore"):
        bw_tc = 2.0 * (w + p * wv) / (R * factor * (n + 1.0))
    near = np.zeros(np.broadcast_shapes(t.shape, tc0.shape), dtype=bool)
    for tc in (landau_tc, bw_tc):
        near |= np.nan_to_num(np.abs(t - tc), nan=np.inf) < EXCLUSION_K
    return near


def _d5(fn, h):
    """5-point central difference of fn(offset) with step h."""
    return (fn(-2.0 * h) - 8.0 * fn(-h) + 8.0 * fn(h) - fn(2.0 * h)) / (12.0 * h)


def _check(name, numeric, analytic, keep, params, rtol=RTOL, atol=0.0):
    rtol_arr = np.full(len(params.names), rtol)
    if name == "cp":
        rtol_arr[params.is_liquid] = RTOL_LIQUID_CP
    err = np.abs(numeric - analytic)
    bad = keep & ~(err <= rtol_arr * np.abs(analytic) + atol)
    assert keep.sum(axis=0).min() >= MIN_POINTS
    if bad.any():
        rel = np.where(keep, err / np.maximum(np.abs(analytic), 1e-300), 0.0)
        worst = np.argmax(rel.max(axis=0))
        raise AssertionError(f"{name}: {int(bad.sum())} failures; worst {params.names[worst]} rel {rel.max():.2e}")


def test_enthalpy_is_gibbs_plus_ts(params, points):
    p, t = points
    s = standard_state(params, p, t)
    scale = np.abs(s.g_j_per_mol) + np.abs(t[:, None] * s.s_j_per_mol_k)
    assert np.all(np.abs(s.h_j_per_mol - (s.g_j_per_mol + t[:, None] * s.s_j_per_mol_k)) <= 4e-16 * scale)


def test_entropy_is_minus_dg_dt(params, points):
    p, t = points
    keep = ~_near_transition(params, p, t)
    numeric = -_d5(lambda d: standard_state(params, p, t + d).g_j_per_mol, H_T_K)
    _check("s", numeric, standard_state(params, p, t).s_j_per_mol_k, keep, params)


def test_volume_is_dg_dp(params, points):
    p, t = points
    keep = ~_near_transition(params, p, t)
    numeric = _d5(lambda d: standard_state(params, p + d, t).g_j_per_mol, H_P_PA)
    _check("v", numeric, standard_state(params, p, t).v_m3_per_mol, keep, params)


def test_heat_capacity_is_t_ds_dt(params, points):
    p, t = points
    keep = ~_near_transition(params, p, t)
    numeric = t[:, None] * _d5(lambda d: standard_state(params, p, t + d).s_j_per_mol_k, H_T_K)
    _check("cp", numeric, standard_state(params, p, t).cp_j_per_mol_k, keep, params)


def test_thermal_expansivity_is_dlnv_dt(params, points):
    p, t = points
    keep = ~_near_transition(params, p, t)
    state = standard_state(params, p, t)
    numeric = _d5(lambda d: standard_state(params, p, t + d).v_m3_per_mol, H_T_K) / state.v_m3_per_mol
    _check("alpha", numeric, state.alpha_per_k, keep, params, atol=ALPHA_ATOL_PER_K)


def test_bulk_modulus_is_minus_v_dp_dv(params, points):
    p, t = points
    keep = ~_near_transition(params, p, t)
    state = standard_state(params, p, t)
    numeric = -state.v_m3_per_mol / _d5(lambda d: standard_state(params, p + d, t).v_m3_per_mol, H_P_PA)
    _check("k_t", numeric, state.k_t_pa, keep, params)


def test_vectorized_call_equals_scalar_calls(params, points):
    p, t = points
    fields = ("g_j_per_mol", "h_j_per_mol", "s_j_per_mol_k", "cp_j_per_mol_k", "v_m3_per_mol", "alpha_per_k", "k_t_pa")
    vector = standard_state(params, p, t)
    for i in range(0, N_POINTS, 12):
        scalar = standard_state(params, p[i], t[i])
        for key in fields:
            assert getattr(scalar, key).shape == (len(params.names),)
            # identical arithmetic, so agreement to round-off (in practice bitwise)
            np.testing.assert_allclose(getattr(vector, key)[i], getattr(scalar, key), rtol=1e-13, atol=0.0)


def test_broadcasting_pressure_against_temperature(params, points):
    p, t = points[0][:5], points[1][:7]
    grid = standard_state(params, p[:, None], t[None, :])
    assert grid.g_j_per_mol.shape == (5, 7, len(params.names))
    np.testing.assert_allclose(grid.g_j_per_mol[2, 3], standard_state(params, p[2], t[3]).g_j_per_mol, rtol=1e-13)
