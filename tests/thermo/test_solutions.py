"""Solution models: activities, chemical potentials and entropies are mutually consistent."""

import numpy as np
import pytest
from scipy.constants import R

from thermo.dataset import load_dataset
from thermo.phases import solution_models
from thermo.solutions import chemical_potentials, excess, ideal_entropy, ideal_log_activity, molar_gibbs

DS = load_dataset()
MODELS = solution_models(DS)


@pytest.mark.parametrize("name", sorted(MODELS))
def test_pure_endmembers_have_unit_ideal_activity(name):
    model = MODELS[name]
    eye = np.eye(model.size) + 1e-300
    log_a = ideal_log_activity(model, eye)
    assert np.allclose(np.diag(log_a), 0.0, atol=1e-9)


@pytest.mark.parametrize("name", sorted(MODELS))
def test_chemical_potentials_are_partial_derivatives_of_total_gibbs_energy(name):
    """μ_i = ∂(N·G)/∂n_i at fixed T, P (central differences, relative 1e-7)."""
    model = MODELS[name]
    rng = np.random.default_rng(7)
    g0 = rng.normal(-2e6, 3e5, model.size)
    t, p = 1700.0, 3e9
    for n in rng.dirichlet(np.ones(model.size), size=5):
        mu = chemical_potentials(model, n, g0, t, p)
        for i in range(model.size):
            h = 1e-6
            up, dn = n.copy(), n.copy()
            up[i] += h
            dn[i] -= h
            fd = (molar_gibbs(model, up, g0, t, p) * up.sum() - molar_gibbs(model, dn, g0, t, p) * dn.sum()) / (2 * h)
            assert mu[i] == pytest.approx(fd, rel=1e-7, abs=1e-3)


@pytest.mark.parametrize("name", sorted(MODELS))
def test_configurational_entropy_is_minus_temperature_derivative_of_ideal_gibbs_energy(name):
    model = MODELS[name]
    x = np.random.default_rng(3).dirichlet(np.ones(model.size))
    g_ideal = np.sum(x * R * ideal_log_activity(model, x))  # per kelvin
    assert ideal_entropy(model, x) == pytest.approx(-g_ideal, rel=1e-12)


def test_symmetric_margules_binary_matches_regular_solution_formula():
    """Regular solution: μ_ex,1 = W·x2², G_ex = W·x1·x2 (Powell & Holland 1993, Am. Mineral. 78:1174)."""
    model = MODELS["ferropericlase"]
    x = np.array([0.3, 0.7])
    g_ex, mu_ex = excess(model, x, 1500.0, 0.0)
    w = 13000.0
    assert g_ex == pytest.approx(w * 0.3 * 0.7)
    assert mu_ex == pytest.approx([w * 0.7**2, w * 0.3**2])
