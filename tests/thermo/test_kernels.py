"""The compiled kernels agree with the solution models they compile and with an independent minimizer.

* chemical potentials equal :func:`thermo.solutions.chemical_potentials` to round-off;
* the analytic Jacobian equals the complex-step derivative of those chemical potentials
  (Squire & Trapp 1998, SIAM Rev. 40:110), for every solution of the default dataset,
  including compositions with an absent (zero) endmember;
* Gibbs–Duhem: Σ_i n_i ∂μ_i/∂n_j = 0 (Jacobian rows weighted by the amounts vanish);
* the compiled driving-force minimization reaches the same minimum, at the same composition,
  as the numpy reference from the same starts.
"""

import numpy as np
import pytest

from tests.thermo import driving_force_reference as reference
from thermo import kernels
from thermo import solutions as sol
from thermo.endmembers import standard_state
from thermo.equilibrium import prepare
from thermo.minimize import _kernel_args, minimize_driving_force

# Invented demo bulk (Kestrel IV scenario, ../shared/DESIGN.md §5).
BASALT_LIKE = {"SiO2": 50.0, "Al2O3": 15.0, "FeO": 10.0, "MgO": 8.0, "CaO": 12.0, "Na2O": 3.0}
SYSTEM = prepare(BASALT_LIKE).system
STATES = [(1e5, 1400.0), (3e9, 1800.0), (15e9, 2300.0), (24e9, 2600.0)]


def _cases():
    for p, t in STATES:
        g0 = standard_state(SYSTEM.params, p, t).g_j_per_mol
        for ph in SYSTEM.solutions:
            yield pytest.param(ph, np.ascontiguousarray(g0[ph.endmember_index]), p, t, id=f"{ph.name}-{p / 1e9:g}GPa")


def _compositions(m, rng):
    x = rng.dirichlet(np.full(m, 0.6), size=16) * rng.uniform(0.2, 5.0, (16, 1))
    x[0, 0] = 0.0  # an absent endmember
    return x


@pytest.mark.parametrize(("ph", "g0", "p", "t"), list(_cases()))
def test_kernel_chemical_potentials_and_jacobian_match_the_solution_model(ph, g0, p, t):
    rng = np.random.default_rng(ph.model.size)
    m = ph.model.size
    x = _compositions(m, rng)
    args = _kernel_args(ph, g0, t, p)
    mu, jac = kernels.chemical_potentials_jacobian(x, *args)
    mu_ref = sol.chemical_potentials(ph.model, x, g0, t, p)
    ok = x > 0  # an absent endmember's μ is finite but floored; compare present ones
    assert np.abs(mu - mu_ref)[ok].max() <= 1e-12 * np.abs(mu_ref).max()
    live = x[1:]  # complex step on strictly positive compositions
    _, jac_ref = reference.mu_jacobian(ph, live, g0, t, p)
    scale = np.abs(jac_ref).max()
    assert np.abs(jac[1:] - jac_ref).max() <= 1e-10 * scale
    # Gibbs–Duhem: Σ_i n_i dμ_i = 0 for any dn
    assert np.abs(np.einsum("ki,kij->kj", live, jac[1:])).max() <= 1e-9 * scale * live.sum(axis=1).max()


@pytest.mark.parametrize(("ph", "g0", "p", "t"), [c for c in _cases() if c.values[0].model.size > 1][::3])
def test_compiled_driving_force_minimum_equals_the_numpy_reference(ph, g0, p, t):
    """Same local minima from the same starts, against chemical potentials 1 kJ/mol off a vertex's."""
    rng = np.random.default_rng(7)
    m = ph.model.size
    # a μ that makes some interior composition competitive: the solution's own μ at a random point,
    # projected on the components (least squares), lowered by 1 kJ/mol per component
    x0 = rng.dirichlet(np.ones(m))
    mu_x0 = sol.chemical_potentials(ph.model, x0, g0, t, p)
    mu_c = np.linalg.lstsq(ph.stoich, mu_x0, rcond=None)[0] - 1e3
    starts = rng.dirichlet(np.ones(m), size=6)
    x_k, d_k, _ = minimize_driving_force(ph, starts, g0, t, p, mu_c, 60)
    x_r, d_r, _ = reference.minimize_driving_force(ph, starts, g0, t, p, mu_c, 60)
    assert np.all(np.isfinite(d_k))
    assert d_k.min() <= d_r.min() + 1e-6
    assert np.abs(d_k.min() - d_r.min()) <= max(1e-6, 1e-9 * abs(d_r.min()))
    assert np.abs(x_k[np.argmin(d_k)] - x_r[np.argmin(d_r)]).max() < 1e-4


def test_warm_up_compiles_the_signatures_the_minimizer_uses():
    """After warm_up() a full equilibrium adds no new compiled signature (no request pays compilation)."""
    from thermo.equilibrium import solve_point

    kernels.warm_up()
    dispatchers = [kernels.chemical_potentials, kernels.chemical_potentials_jacobian, kernels.driving_forces,
                   kernels.distinct_rows, kernels.standard_state_rows,
                   kernels.minimize_driving_force, kernels.bragg_williams_order]
    before = [len(d.signatures) for d in dispatchers]
    solve_point(prepare(BASALT_LIKE), 2.0, 1500.0)
    assert [len(d.signatures) for d in dispatchers] == before


def test_compiled_standard_state_equals_the_numpy_evaluation_for_every_endmember():
    """All 55+ endmembers of the default dataset (solids, liquids, Landau and Bragg-Williams ordering) at 400
    random (P, T) from 0 to 30 GPa and 300 to 4000 K, three temperatures per call: same numbers to 1e-13
    relative and NaN in the same places (states where an equation of state has no real solution)."""
    from thermo.dataset import load_dataset
    from thermo.endmembers import standard_state, standard_state_grid

    prm = load_dataset().endmembers
    rng = np.random.default_rng(3)
    fields = ("g_j_per_mol", "h_j_per_mol", "s_j_per_mol_k", "cp_j_per_mol_k", "v_m3_per_mol", "alpha_per_k",
              "k_t_pa")
    for _ in range(400):
        p, temps = rng.uniform(0.0, 30e9), rng.uniform(300.0, 4000.0, size=3)
        for args in ((p, temps), (p, float(temps[0]))):
            fast, ref = standard_state(prm, *args), standard_state_grid(prm, *args)
            for f in fields:
                x, y = getattr(fast, f), getattr(ref, f)
                assert x.shape == y.shape
                np.testing.assert_array_equal(np.isnan(x), np.isnan(y))
                ok = ~np.isnan(y)
                assert np.all(np.abs(x[ok] - y[ok]) <= 1e-13 * np.maximum(np.abs(y[ok]), 1e-300)), f


def test_the_linear_programme_writes_nothing_to_standard_output():
    """HiGHS prints a banner when a process makes its first instance; the CLI's JSON on stdout must stay clean."""
    import subprocess
    import sys

    code = ("from thermo.equilibrium import prepare, solve_point; "
            "solve_point(prepare({'SiO2': 50.0, 'MgO': 50.0}), 1.0, 1500.0)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300, check=True)
    assert out.stdout == ""
