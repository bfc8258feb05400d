"""Isobaric cooling paths (equilibrium and fractional) and isentropes.

Checks are thermodynamic identities of the computed states (dh = T ds along
an equilibrium isobar, equal Gibbs energies on both sides of an invariant,
energy conservation of fractional crystallization, the Maxwell relation along
an isentrope) and published 1-bar data on the Di–An join (checks.csv rows
named beside each test; the liquid model's own agreement with D01-D04 is tested in
test_minimize_binaries.py). Liquid models: tests/thermo/binary_models.py.
"""

from __future__ import annotations

import numpy as np
import pytest

from tests.thermo.binary_systems import CELSIUS_K, di_an, fo_fa
from thermo.energetics import (
    integrate_step,
    integrate_step_with_slopes,
    oxide_mass_kg,
    parcel_problem,
    path_derivatives,
    solve_state,
)
from thermo.errors import InputError, OutOfDomainError
from thermo.isentropes import isentrope
from thermo.paths import cooling_path

ONE_BAR_GPA = 1e-4
START_K, STOP_K, STEP_K = 1400.0 + CELSIUS_K, 1250.0 + CELSIUS_K, 10.0  # brackets D03 (1389 °C) and D01 (1274 °C)


@pytest.fixture(scope="module")
def equilibrium_path():
    return cooling_path(di_an(60.0), ONE_BAR_GPA, START_K, STOP_K, STEP_K)


@pytest.fixture(scope="module")
def fractional_path():
    return cooling_path(di_an(60.0), ONE_BAR_GPA, START_K, STOP_K, STEP_K, mode="fractional")


def _eutectic(path):
    return next(b for b in path.boundaries if b.isothermal)


# ------------------------------------------------------------- equilibrium
def test_equilibrium_path_satisfies_dh_equals_t_ds(equilibrium_path):
    """Along an isobar at fixed bulk composition dH = T dS: ∫T ds over each step equals the heat it releases."""
    heat = np.array([p.step_heat_released_j_per_kg_initial for p in equilibrium_path.points[1:]])
    t_ds = np.array([p.step_t_ds_j_per_kg_initial for p in equilibrium_path.points[1:]])
    assert abs(t_ds.sum() - heat.sum()) / abs(heat.sum()) < 1e-4
    assert np.all(np.abs(t_ds - heat) <= 1e-4 * np.abs(heat) + 1e-6)
    assert equilibrium_path.diagnostics["t_ds_identity_relative_residual"] < 1e-4


def test_eutectic_is_an_isothermal_step_with_finite_heat(equilibrium_path):
    """Di–An at 1 bar: liquid → diopside + anorthite at one temperature (F = 0), with finite latent heat.

    At the invariant both sides have the same Gibbs energy, so the heat released
    equals T·Δs across the step (tested to 1e-5, limited by the ±ε offset of the
    two rows, 1e-6 K).
    """
    b = _eutectic(equilibrium_path)
    assert b.variance == 0 and b.appearing == ("diopside",) and b.disappearing == ("liquid",)
    rows = [p for p in equilibrium_path.points if p.kind.startswith("boundary") and
            abs(p.temperature_k - b.temperature_k) < 1e-3]
    above, below = sorted(rows, key=lambda p: -p.temperature_k)
    assert above.temperature_k - below.temperature_k < 1e-4
    assert above.melt_fraction > 0.5 and below.melt_fraction == 0.0
    heat = b.specific_enthalpy_above_j_per_kg - b.specific_enthalpy_below_j_per_kg
    assert heat == pytest.approx(b.heat_released_j_per_kg_initial, rel=1e-12)
    t_ds = b.temperature_k * (above.specific_entropy_j_per_kg_k - below.specific_entropy_j_per_kg_k)
    assert heat > 1e5
    assert t_ds == pytest.approx(heat, rel=1e-5)


def _al2o3(phase_record) -> float:
    return phase_record.composition_wt_percent["Al2O3"]


def test_rows_obey_the_lever_rule(equilibrium_path):
    """Between liquidus and eutectic the solid is pure anorthite, so the reported melt fraction and the
    liquid's reported Al2O3 content obey the lever rule on Al2O3 with the bulk (mass balance, to 1e-9)."""
    bulk_al = di_an(60.0).bulk.wt_percent()["Al2O3"]
    rows = [p for p in equilibrium_path.points if p.kind == "grid" and 0.0 < p.melt_fraction < 1.0]
    assert len(rows) >= 8
    for row in rows:
        phases = {ph.name: ph for ph in row.phases}
        assert set(phases) == {"liquid", "anorthite"}
        al_an, al_liq = _al2o3(phases["anorthite"]), _al2o3(phases["liquid"])
        assert row.melt_fraction == pytest.approx((al_an - bulk_al) / (al_an - al_liq), abs=1e-9)
        assert phases["liquid"].mass_fraction == pytest.approx(row.melt_fraction, abs=1e-12)


def test_cp_effective_equals_frozen_where_nothing_reacts(equilibrium_path):
    """In the liquid-only field (fixed speciation on a binary join) and below the eutectic (pure solids)
    no latent heat is released: cp_eff = cp_frozen to the finite-difference accuracy (1e-6 relative)."""
    for p in equilibrium_path.points:
        if p.melt_fraction in (0.0, 1.0) and p.kind == "grid":
            assert p.latent_heat_rate_j_per_kg_k == pytest.approx(0.0, abs=1e-6 * p.cp_frozen_j_per_kg_k)
        elif 0.0 < p.melt_fraction < 1.0 and p.kind == "grid":
            assert p.latent_heat_rate_j_per_kg_k > 0.1 * p.cp_frozen_j_per_kg_k


def test_cp_effective_is_the_derivative_of_the_path_enthalpy(equilibrium_path):
    """cp_eff at a row equals (h(T+1) − h(T−1))/2 of converged states to the O(ΔT²) error of that
    coarse difference (2e-4 relative here), i.e. it is dh/dT of the path, latent heat included."""
    pb = di_an(60.0)
    row = next(p for p in equilibrium_path.points if p.kind == "grid" and 0.75 < p.melt_fraction < 0.95)
    h = [solve_state(pb, ONE_BAR_GPA * 1e9, row.temperature_k + d).props.h_j_per_kg for d in (-1.0, 1.0)]
    assert row.cp_effective_j_per_kg_k == pytest.approx((h[1] - h[0]) / 2.0, rel=2e-4)


def test_step_latent_heat_is_converged_in_the_quadrature():
    """The sensible part ∫cp_frozen dT over a 10 K two-phase step: Simpson on 2 sub-steps and the
    end-corrected trapezoid (no sub-step states; used by equilibrium paths) agree with Simpson on 8
    sub-steps to 1e-7 relative in the latent heat."""
    pb = di_an(60.0)
    upper = solve_state(pb, 1e5, 1600.0)
    lower = solve_state(pb, 1e5, 1590.0, warm=upper)
    fine = integrate_step(pb, upper, lower, 8)
    slopes = integrate_step_with_slopes(upper, lower, path_derivatives(pb, upper), path_derivatives(pb, lower))
    for rule in (integrate_step(pb, upper, lower, 2), slopes):
        assert rule.latent_heat_j == pytest.approx(fine.latent_heat_j, rel=1e-7)
        assert rule.t_ds_j == pytest.approx(rule.heat_released_j, rel=1e-6)
    assert fine.latent_heat_j > 0.3 * fine.heat_released_j


def test_path_rows_include_root_found_boundaries(equilibrium_path):
    """Liquidus and eutectic appear as rows off the 10 K grid, at D03 and D01 (±15 K: the liquid model
    was fitted to these rows, so this checks that the path finds them, not the model)."""
    assert equilibrium_path.liquidus_k == pytest.approx(1389.0 + CELSIUS_K, abs=15.0)
    assert equilibrium_path.solidus_k == pytest.approx(1274.0 + CELSIUS_K, abs=15.0)
    off_grid = [p.temperature_k for p in equilibrium_path.points if p.kind.startswith("boundary")]
    assert len(off_grid) == 4
    assert all(abs((START_K - t) / STEP_K - round((START_K - t) / STEP_K)) > 1e-6 for t in off_grid)


# -------------------------------------------------------------- fractional
@pytest.mark.parametrize("trapped", [0.0, 0.25])
def test_fractional_path_conserves_energy(trapped, fractional_path):
    """H_parcel + Σ H_removed + Σ heat released = H_initial (per kg of starting parcel), to 1e-8."""
    path = fractional_path if trapped == 0.0 else cooling_path(
        di_an(60.0), ONE_BAR_GPA, START_K, STOP_K, 25.0, mode="fractional", trapped_melt_fraction=trapped)
    removed = sum(c.enthalpy_j_per_kg_initial for c in path.cumulates)
    heat = sum(p.step_heat_released_j_per_kg_initial for p in path.points)
    balance = path.final_parcel_enthalpy_j_per_kg_initial + removed + heat
    assert balance == pytest.approx(path.initial_enthalpy_j_per_kg_initial, rel=1e-8)
    mass = path.final_parcel_mass_kg_per_kg_initial + sum(c.mass_kg_per_kg_initial for c in path.cumulates)
    assert mass == pytest.approx(1.0, rel=1e-10)


def test_fractional_cumulates_carry_the_trapped_melt_fraction():
    path = cooling_path(di_an(60.0), ONE_BAR_GPA, START_K, STOP_K, 25.0, mode="fractional",
                        trapped_melt_fraction=0.25)
    assert len(path.cumulates) > 3
    for layer in path.cumulates[:-1]:  # the last layer (the eutectic) has no melt left to trap
        assert layer.trapped_melt_mass_fraction == pytest.approx(0.25, abs=1e-12)


def test_fractional_binary_eutectic_ends_at_the_eutectic(fractional_path, equilibrium_path):
    """On a binary with pure solids the residual liquid reaches the eutectic and crystallizes there
    completely: the fractional solidus is the eutectic temperature, and the last cumulate layer has the
    composition of the eutectic liquid (its anorthite mass fraction equals the liquid's Al2O3 content
    over that of anorthite, to 1e-6)."""
    assert fractional_path.solidus_k == pytest.approx(equilibrium_path.solidus_k, abs=1e-5)
    assert any("fully crystallized" in n for n in fractional_path.notes)
    t_e = _eutectic(fractional_path).temperature_k
    above = next(p for p in fractional_path.points if p.kind == "boundary_above" and abs(p.temperature_k - t_e) < 1e-3)
    phases = {ph.name: ph for ph in above.phases}
    an_in_liquid = _al2o3(phases["liquid"]) / _al2o3(phases["anorthite"])
    last = fractional_path.cumulates[-1]
    assert last.mineral_proportions["anorthite"] == pytest.approx(an_in_liquid, abs=1e-6)
    assert fractional_path.final_parcel_mass_kg_per_kg_initial == 0.0


def test_fractional_and_equilibrium_release_the_same_latent_heat_for_pure_solids(fractional_path, equilibrium_path):
    """With pure solid phases the liquid line of descent is the same in both modes: the same crystals form
    at the same temperatures, so the latent heat released down to the eutectic agrees; the total heat does
    not, because removed crystals no longer cool with the parcel. Tolerance 1e-6: the Simpson quadrature of
    ∫cp_frozen dT differs between the modes (the cumulates' cp is in one integrand only)."""
    def latent_to_eutectic(path):
        t_e = _eutectic(path).temperature_k
        return sum(p.step_latent_heat_j_per_kg_initial for p in path.points if p.temperature_k > t_e + 1e-3)

    assert latent_to_eutectic(fractional_path) == pytest.approx(latent_to_eutectic(equilibrium_path), rel=1e-6)
    assert _eutectic(fractional_path).temperature_k == pytest.approx(_eutectic(equilibrium_path).temperature_k,
                                                                     abs=1e-5)


def test_fractional_path_says_when_the_solidus_is_not_reached():
    """Fo–Fa (continuous solid solution): the residual liquid is driven towards fayalite and survives
    below the equilibrium solidus; the path reports no solidus and says so."""
    path = cooling_path(fo_fa(50.0), ONE_BAR_GPA, 1950.0, 1690.0, 26.0, mode="fractional")
    assert path.solidus_k is None
    assert any("solidus is not reached" in n for n in path.notes)
    assert path.final_parcel_mass_kg_per_kg_initial > 0.0
    assert path.points[-1].melt_fraction > 0.5


def test_saturation_sequence_of_the_path(equilibrium_path):
    seq = [(e.phase, e.event) for e in equilibrium_path.saturation_sequence()]
    assert seq == [("anorthite", "appears"), ("diopside", "appears"), ("liquid", "disappears")]


@pytest.mark.parametrize(("kwargs", "error"), [
    ({"mode": "batch"}, InputError), ({"trapped_melt_fraction": 1.0}, InputError),
    ({"stop_temperature_k": 1700.0}, InputError), ({"pressure_gpa": 40.0}, OutOfDomainError),
])
def test_path_rejects_bad_arguments(kwargs, error):
    args = {"pressure_gpa": ONE_BAR_GPA, "start_temperature_k": 1650.0, "stop_temperature_k": 1600.0,
            "step_k": 10.0} | kwargs
    with pytest.raises(error):
        cooling_path(di_an(60.0), **args)


# --------------------------------------------------------------- isentropes
def test_isentrope_obeys_the_maxwell_relation_in_the_melting_region():
    """(∂T/∂P)_s = T·v·α_eff/cp_eff (Maxwell relation (∂T/∂P)_S = (∂V/∂S)_P) with effective,
    latent-heat-including derivatives, in the Fo–Fa melting loop at 1 GPa (to 1e-5; the
    centred pressure difference of ±1 MPa contributes ~1e-8)."""
    pb = fo_fa(50.0)
    iso = isentrope(pb, [1.0 - 1e-3, 1.0, 1.0 + 1e-3], potential_temperature_k=1800.0)
    assert 0.05 < iso.melt_fraction[1] < 0.95
    slope = (iso.temperature_k[2] - iso.temperature_k[0]) / 2e6  # K/Pa
    state = solve_state(pb, 1e9, iso.temperature_k[1])
    d = path_derivatives(pb, state)
    expected = state.temperature_k * state.props.v_m3_per_kg * d.alpha_effective_per_k / d.cp_effective_j_per_kg_k
    assert slope == pytest.approx(expected, rel=1e-5)


def test_isentrope_keeps_the_entropy_and_crystallizes_on_compression():
    pb = fo_fa(50.0)
    iso = isentrope(pb, [ONE_BAR_GPA, 0.5, 1.0, 2.0], potential_temperature_k=1800.0)
    for p, t in zip(iso.pressure_gpa, iso.temperature_k, strict=True):
        s = solve_state(pb, p * 1e9, t).props.s_j_per_kg_k
        assert s == pytest.approx(iso.specific_entropy_j_per_kg_k, abs=1e-6)
    assert iso.temperature_k[0] == 1800.0
    assert np.all(np.diff(iso.temperature_k) > 0) and np.all(np.diff(iso.melt_fraction) < 0)


def test_isentrope_inside_an_invariant_follows_the_lever_rule():
    """An entropy between the two sides of the Di–An eutectic puts the isentrope at the eutectic
    temperature with the melt fraction of the lever rule in entropy."""
    pb = di_an(60.0)
    path_b = _eutectic(cooling_path(pb, ONE_BAR_GPA, 1560.0, 1540.0, 20.0))
    above = solve_state(pb, 1e5, path_b.temperature_k + 1e-4)
    below = solve_state(pb, 1e5, path_b.temperature_k - 1e-4)
    s0 = 0.3 * above.props.s_j_per_kg_k + 0.7 * below.props.s_j_per_kg_k
    iso = isentrope(pb, [ONE_BAR_GPA], specific_entropy_j_per_kg_k=s0)
    assert iso.on_invariant[0]
    assert iso.temperature_k[0] == pytest.approx(path_b.temperature_k, abs=1e-6)
    assert iso.melt_fraction[0] == pytest.approx(0.3 * above.props.melt_fraction, rel=1e-4)


def test_parcel_rebuild_drops_vanished_components():
    """A fractional parcel whose bulk loses a component gets a phase system without it (phases carrying
    it drop out); a bulk with the same components keeps the system object, so warm starts survive."""
    pb = di_an(60.0)
    ds = pb.dataset
    diopside = ds.stoichiometry[ds.index("diopside")] * 2.0  # 2 mol CaMgSi2O6, no Al2O3
    rebuilt, mass = parcel_problem(pb, diopside)
    assert mass == pytest.approx(2.0 * ds.info["diopside"].molar_mass_kg_per_mol, rel=1e-12)
    assert "Al2O3" not in rebuilt.system.components and "anorthite" not in rebuilt.system.pure_names
    assert oxide_mass_kg(ds.oxides, rebuilt.bulk.mol_per_kg) == pytest.approx(1.0)
    state = solve_state(rebuilt, 1e5, 1700.0)
    assert state.signature == ("liquid",)
    same, _ = parcel_problem(pb, pb.bulk.mol_per_kg * 3.0)
    assert same.system is pb.system
